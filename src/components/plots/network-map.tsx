import { geoMercator, geoPath, type GeoPermissibleObjects } from 'd3-geo';
import { useQuery } from '@tanstack/react-query';
import { feature } from 'topojson-client';
import type { Topology, GeometryObject } from 'topojson-specification';
import landUrl from 'world-atlas/land-50m.json?url';
import type { NetworkMap } from '../../../shared/network';

// The network drawn offline: Natural Earth 1:50m land (world-atlas, served from our own origin), a Mercator projection
// fitted to the network's extent, and our own symbols: shape and line style carry the meaning, colour repeats it.

export type MapSelection =
  | { kind: 'benchmark'; id: string }
  | { kind: 'section'; id: string }
  | { kind: 'site'; id: string }
  | { kind: 'link'; id: string };

const useLand = () =>
  useQuery({
    queryKey: ['map', 'land-50m'],
    queryFn: async () => {
      const topo = (await (await fetch(landUrl)).json()) as Topology<{ land: GeometryObject }>;
      return feature(topo, topo.objects.land) as GeoPermissibleObjects;
    },
    staleTime: Infinity,
  });

export function sectionStyle(w: number | null, suspected: boolean, adjusted = true) {
  if (!adjusted) return { cls: 'stroke-ink-300', width: 1.5, dash: '2 3', label: 'not in an adjustment yet' };
  if (w === null) return { cls: 'stroke-ink-400', width: 1.5, dash: '1 4', label: 'not controlled (redundancy 0)' };
  if (suspected) return { cls: 'stroke-disagree-600', width: 4, dash: '8 3', label: '|w| above the critical value (suspected)' };
  if (Math.abs(w) > 2) return { cls: 'stroke-brass-500', width: 2.5, dash: undefined, label: '2 < |w| ≤ critical' };
  return { cls: 'stroke-ink-500', width: 1.5, dash: undefined, label: '|w| ≤ 2' };
}

export function NetworkMapSvg({ data, selected, onSelect, focusDatum }: { data: NetworkMap; selected: MapSelection | null; onSelect: (s: MapSelection) => void; focusDatum?: string }) {
  const land = useLand();
  const width = 900;
  const height = 620;
  // The projection is fitted to the whole network, or to one datum's benchmarks (and the sites tied to them).
  const focus = focusDatum ? data.benchmarks.filter((b) => b.datumName === focusDatum) : data.benchmarks;
  const focusCodes = new Set(focus.map((b) => b.code));
  const coords: [number, number][] = [
    ...focus.map((b) => [b.longitudeDeg, b.latitudeDeg] as [number, number]),
    ...data.sites.filter((s) => !focusDatum || (s.benchmarkCode && focusCodes.has(s.benchmarkCode))).map((s) => [s.longitudeDeg, s.latitudeDeg] as [number, number]),
  ];
  if (coords.length === 0) return <p className="text-sm text-ink-500">Nothing to draw yet.</p>;
  const projection = geoMercator().fitExtent([[60, 40], [width - 60, height - 40]], { type: 'MultiPoint', coordinates: coords });
  const path = geoPath(projection);
  const bm = new Map(data.benchmarks.map((b) => [b.code, b]));
  const sites = new Map(data.sites.map((s) => [s.id, s]));
  const p = (lon: number, lat: number) => projection([lon, lat]) ?? [0, 0];
  // Labels only where they do not collide: a benchmark is named when its nearest neighbour is more than 30 px away.
  const xy = data.benchmarks.map((b) => p(b.longitudeDeg, b.latitudeDeg));
  const labelled = new Set<string>();
  if (xy.length <= 400) {
    xy.forEach(([x0, y0], i) => {
      let nearest = Infinity;
      xy.forEach(([x1, y1], j) => { if (i !== j) nearest = Math.min(nearest, Math.hypot(x1 - x0, y1 - y0)); });
      if (nearest > 30) labelled.add(data.benchmarks[i].id);
    });
  }
  const isSel = (kind: MapSelection['kind'], id: string) => selected?.kind === kind && selected.id === id;
  const key = (e: React.KeyboardEvent, s: MapSelection) => { if (e.key === 'Enter' || e.key === ' ') { e.preventDefault(); onSelect(s); } };
  return (
    <svg role="img" aria-label="Map of the levelling network" viewBox={`0 0 ${width} ${height}`} className="w-full rounded-md border border-paper-200 bg-[#e9f1f3] font-sans text-[10px]">
      <defs><clipPath id="map-clip"><rect width={width} height={height} /></clipPath></defs>
      <g clipPath="url(#map-clip)">
        {land.data && <path d={path(land.data) ?? ''} className="fill-paper-100 stroke-paper-200" />}
        {data.links.map((l) => {
          const a = sites.get(l.fromSiteId);
          const b = sites.get(l.toSiteId);
          if (!a || !b) return null;
          const [x1, y1] = p(a.longitudeDeg, a.latitudeDeg);
          const [x2, y2] = p(b.longitudeDeg, b.latitudeDeg);
          const cls = l.en === null ? 'stroke-ink-400' : Math.abs(l.en) <= 1 ? 'stroke-agree-600' : 'stroke-disagree-600';
          const mx = (x1 + x2) / 2 + (y2 - y1) * 0.15;
          const my = (y1 + y2) / 2 - (x2 - x1) * 0.15;
          return (
            <g key={l.id} tabIndex={0} role="button" aria-label={`Fibre link ${l.label}`} onClick={() => onSelect({ kind: 'link', id: l.id })} onKeyDown={(e) => key(e, { kind: 'link', id: l.id })} className="cursor-pointer">
              <path d={`M${x1},${y1} Q${mx},${my} ${x2},${y2}`} fill="none" className={cls} strokeWidth={isSel('link', l.id) ? 5 : 3} strokeDasharray="10 4 2 4" />
              <text x={mx} y={my - 4} textAnchor="middle" className="fill-ink-800">{l.label}{l.en !== null ? ` · E_n ${l.en.toFixed(2)}` : ''}</text>
            </g>
          );
        })}
        {data.sections.map((s) => {
          const a = bm.get(s.fromCode);
          const b = bm.get(s.toCode);
          if (!a || !b) return null;
          const [x1, y1] = p(a.longitudeDeg, a.latitudeDeg);
          const [x2, y2] = p(b.longitudeDeg, b.latitudeDeg);
          const st = sectionStyle(s.standardizedResidual, s.suspected, s.adjusted);
          return (
            <g key={s.id} tabIndex={0} role="button" aria-label={`Section ${s.fromCode} to ${s.toCode}`} onClick={() => onSelect({ kind: 'section', id: s.id })} onKeyDown={(e) => key(e, { kind: 'section', id: s.id })} className="cursor-pointer">
              <line x1={x1} y1={y1} x2={x2} y2={y2} stroke="transparent" strokeWidth={10} />
              <line x1={x1} y1={y1} x2={x2} y2={y2} className={st.cls} strokeWidth={isSel('section', s.id) ? st.width + 2 : st.width} strokeDasharray={st.dash} />
              {s.suspected && <text x={(x1 + x2) / 2} y={(y1 + y2) / 2 - 6} textAnchor="middle" className="fill-disagree-800 font-semibold">✕ w = {s.standardizedResidual?.toFixed(1)}</text>}
            </g>
          );
        })}
        {data.benchmarks.map((b) => {
          const [x, y] = p(b.longitudeDeg, b.latitudeDeg);
          const sel = isSel('benchmark', b.id);
          return (
            <g key={b.id} tabIndex={0} role="button" aria-label={`Benchmark ${b.code}`} onClick={() => onSelect({ kind: 'benchmark', id: b.id })} onKeyDown={(e) => key(e, { kind: 'benchmark', id: b.id })} className="cursor-pointer">
              {b.destroyed ? (
                <path d={`M${x - 4},${y - 4} L${x + 4},${y + 4} M${x - 4},${y + 4} L${x + 4},${y - 4}`} className="stroke-disagree-800" strokeWidth={2} />
              ) : b.fixed ? (
                <rect x={x - 5} y={y - 5} width={10} height={10} className="fill-ink-800 stroke-white" />
              ) : (
                <circle cx={x} cy={y} r={sel ? 6 : 4} className="fill-white stroke-ink-700" strokeWidth={1.5} />
              )}
              {(labelled.has(b.id) || sel) && <text x={x + 7} y={y + 3} className="fill-ink-700">{b.code}</text>}
              <title>{`${b.code} ${b.name}`}</title>
            </g>
          );
        })}
        {data.sites.map((s) => {
          const [x, y] = p(s.longitudeDeg, s.latitudeDeg);
          return (
            <g key={s.id} tabIndex={0} role="button" aria-label={`Clock site ${s.code} ${s.name}`} onClick={() => onSelect({ kind: 'site', id: s.id })} onKeyDown={(e) => key(e, { kind: 'site', id: s.id })} className="cursor-pointer">
              <path d={`M${x},${y - 9} L${x + 8},${y + 6} L${x - 8},${y + 6} Z`} className="fill-brass-400 stroke-ink-800" strokeWidth={isSel('site', s.id) ? 2.5 : 1} />
              <text x={x} y={y - 13} textAnchor="middle" className="fill-ink-900 font-semibold">{s.name}</text>
            </g>
          );
        })}
      </g>
    </svg>
  );
}

/** The legend repeats every symbol with words. */
export function NetworkMapLegend() {
  const rows: [React.ReactNode, string][] = [
    [<rect key="r" x={4} y={2} width={10} height={10} className="fill-ink-800" />, 'fixed benchmark (datum point)'],
    [<circle key="c" cx={9} cy={7} r={4} className="fill-white stroke-ink-700" strokeWidth={1.5} />, 'free benchmark'],
    [<path key="x" d="M5,3 L13,11 M5,11 L13,3" className="stroke-disagree-800" strokeWidth={2} />, 'destroyed benchmark'],
    [<path key="t" d="M9,1 L16,13 L2,13 Z" className="fill-brass-400 stroke-ink-800" />, 'clock site'],
    ...(['ink', 'brass', 'disagree', 'uncontrolled', 'none'] as const).map((k): [React.ReactNode, string] => {
      const st = k === 'ink' ? sectionStyle(0.5, false) : k === 'brass' ? sectionStyle(2.5, false) : k === 'disagree' ? sectionStyle(5, true) : k === 'uncontrolled' ? sectionStyle(null, false) : sectionStyle(null, false, false);
      return [<line key={k} x1={0} y1={7} x2={18} y2={7} className={st.cls} strokeWidth={st.width} strokeDasharray={st.dash} />, `section: ${st.label}`];
    }),
    [<line key="a" x1={0} y1={7} x2={18} y2={7} className="stroke-agree-600" strokeWidth={3} strokeDasharray="10 4 2 4" />, 'fibre link, clock and levelling agree (|E_n| ≤ 1)'],
    [<line key="d" x1={0} y1={7} x2={18} y2={7} className="stroke-disagree-600" strokeWidth={3} strokeDasharray="10 4 2 4" />, 'fibre link, |E_n| > 1'],
    [<line key="n" x1={0} y1={7} x2={18} y2={7} className="stroke-ink-400" strokeWidth={3} strokeDasharray="10 4 2 4" />, 'fibre link, no comparison yet'],
  ];
  return (
    <ul className="space-y-1 text-xs" aria-label="Map legend">
      {rows.map(([sym, text]) => (
        <li key={text} className="flex items-center gap-2"><svg width={20} height={14} aria-hidden>{sym}</svg>{text}</li>
      ))}
    </ul>
  );
}
