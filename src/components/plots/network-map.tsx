import { geoDistance, geoGraticule, geoInterpolate, geoMercator, geoPath, type GeoPermissibleObjects } from 'd3-geo';
import { useQuery } from '@tanstack/react-query';
import { useEffect, useMemo, useRef, useState, type KeyboardEvent as ReactKeyboardEvent, type PointerEvent as ReactPointerEvent } from 'react';
import { feature } from 'topojson-client';
import type { Topology, GeometryObject } from 'topojson-specification';
import landUrl from 'world-atlas/land-50m.json?url';
import land10mUrl from 'world-atlas/land-10m.json?url';
import type { NetworkMap } from '../../../shared/network';
import { plural } from '../../lib/format';

// The network drawn offline: Natural Earth land (world-atlas, served from our own origin; 1:50m, 1:10m once zoomed
// in), a Mercator projection fitted to the network's extent, and our own symbols: shape and line style carry the
// meaning, colour repeats it. Zoom and pan with the wheel, by dragging, with the buttons or the keyboard; labels are
// placed again at every zoom so none overlaps; fibre links are drawn as geodesics (great circles, d3-geo).

export type MapSelection =
  | { kind: 'benchmark'; id: string }
  | { kind: 'section'; id: string }
  | { kind: 'site'; id: string }
  | { kind: 'link'; id: string };

const useLand = (fine: boolean) =>
  useQuery({
    queryKey: ['map', fine ? 'land-10m' : 'land-50m'],
    queryFn: async () => {
      const topo = (await (await fetch(fine ? land10mUrl : landUrl)).json()) as Topology<{ land: GeometryObject }>;
      return feature(topo, topo.objects.land) as GeoPermissibleObjects;
    },
    staleTime: Infinity,
  });

/** Zoom factor beyond which the 1:10m coastline replaces the 1:50m one. */
const FINE_COAST_ZOOM = 3;
const MAX_ZOOM = 64;
type View = { k: number; fx: number; fy: number };

type Box = { x: number; y: number; w: number; h: number };
type Placed = { x: number; y: number; anchor: 'start' | 'middle' | 'end' };
/** About 6.4 px per character at the map's 10 px Noto Sans, digits and capitals included (an estimate instead of measuring text). */
const CHAR_PX = 6.4;
const LINE_PX = 14;
const overlaps = (a: Box, b: Box) => a.x < b.x + b.w && b.x < a.x + a.w && a.y < b.y + b.h && b.y < a.y + a.h;

/**
 * Greedy label placement: each label tries a few spots around its point in turn and takes the first that overlaps
 * neither a label placed before it nor another point's symbol; with no free spot it is left out (its name stays in the
 * symbol's <title>, shown on hover, and in the accessible name). Labels come in priority order.
 */
export function placeLabels(
  labels: { id: string; x: number; y: number; text: string; lines?: number; offset?: number; bold?: boolean }[],
  obstacles: (Box & { id?: string })[],
  bounds: { width: number; height: number },
): Map<string, Placed> {
  const placed: Box[] = [];
  const out = new Map<string, Placed>();
  for (const l of labels) {
    const w = l.text.length * CHAR_PX * (l.bold ? 1.12 : 1);
    const h = (l.lines ?? 1) * LINE_PX;
    const d = l.offset ?? 7;
    // Boxes from the baseline of the first line: glyphs reach about 11 px above it and 3 px below the last line.
    const boxAt = (x: number, baseline: number, anchor: Placed['anchor']): Placed & { box: Box } => ({
      x, y: baseline, anchor, box: { x: anchor === 'start' ? x : anchor === 'end' ? x - w : x - w / 2, y: baseline - 11, w, h },
    });
    const above = l.y - d - 3 - (h - LINE_PX);
    const below = l.y + d + 11;
    // Candidates: right, left, above, below, then the four diagonals.
    const candidates = [
      boxAt(l.x + d, l.y + 3, 'start'), boxAt(l.x - d, l.y + 3, 'end'), boxAt(l.x, above, 'middle'), boxAt(l.x, below, 'middle'),
      boxAt(l.x + d, above, 'start'), boxAt(l.x - d, above, 'end'), boxAt(l.x + d, below, 'start'), boxAt(l.x - d, below, 'end'),
    ];
    const free = candidates.find((c) =>
      c.box.x >= 0 && c.box.y >= 0 && c.box.x + c.box.w <= bounds.width && c.box.y + c.box.h <= bounds.height
      && !placed.some((b) => overlaps(b, c.box)) && !obstacles.some((o) => o.id !== l.id && overlaps(o, c.box)));
    if (!free) continue;
    placed.push(free.box);
    out.set(l.id, { x: free.x, y: free.y, anchor: free.anchor });
  }
  return out;
}

/** A round length (1, 2 or 5 × 10ⁿ km) whose bar is at most maxPx long. */
export function scaleBarKm(kmPerPx: number, maxPx = 120): { km: number; px: number } {
  const target = kmPerPx * maxPx;
  const p = 10 ** Math.floor(Math.log10(target));
  const km = [5, 2, 1].map((m) => m * p).find((v) => v <= target) ?? p;
  return { km, px: km / kmPerPx };
}

/** A graticule step (degrees) that draws about three to eight lines across a span. */
function graticuleStepDeg(spanDeg: number) {
  const steps = [0.05, 0.1, 0.2, 0.25, 0.5, 1, 2, 5, 10, 15, 30];
  return steps.find((st) => spanDeg / st <= 8) ?? 30;
}

function linkNote(l: NetworkMap['links'][number]) {
  const cs = l.comparisons;
  if (cs.length === 0) return '';
  if (cs.every((c) => c.verdict === 'not-comparable')) return cs.length > 1 ? `${plural(cs.length, 'campaign')} · not comparable` : 'not comparable';
  const ens = cs.map((c) => (c.en === null ? '—' : c.en.toFixed(2)));
  return cs.length > 1 ? `${plural(cs.length, 'campaign')} · Eₙ ${ens.join(' / ')}` : `Eₙ ${ens[0]}`;
}

export function linkClass(l: NetworkMap['links'][number]) {
  const comparable = l.comparisons.filter((c) => c.en !== null);
  if (comparable.length === 0) return 'stroke-ink-400';
  return comparable.every((c) => Math.abs(c.en!) <= 1) ? 'stroke-agree-600' : 'stroke-disagree-600';
}

export function sectionStyle(w: number | null, suspected: boolean, adjusted = true) {
  if (!adjusted) return { cls: 'stroke-ink-300', width: 1.5, dash: '2 3', label: 'not in an adjustment yet' };
  if (w === null) return { cls: 'stroke-ink-400', width: 1.5, dash: '1 4', label: 'not controlled (redundancy 0)' };
  if (suspected) return { cls: 'stroke-disagree-600', width: 4, dash: '8 3', label: '|w| above the critical value (suspected)' };
  if (Math.abs(w) > 2) return { cls: 'stroke-brass-500', width: 2.5, dash: undefined, label: '2 < |w| ≤ critical' };
  return { cls: 'stroke-ink-500', width: 1.5, dash: undefined, label: '|w| ≤ 2' };
}

/** The clock-site symbol: a dial with two hands (our own). */
export function clockSymbolPath(x: number, y: number, r = 7) {
  return `M${x},${y} L${x},${y - r * 0.62} M${x},${y} L${x + r * 0.5},${y + r * 0.12}`;
}

export function NetworkMapSvg({ data, selected, onSelect, focusDatum }: { data: NetworkMap; selected: MapSelection | null; onSelect: (s: MapSelection) => void; focusDatum?: string }) {
  const width = 900;
  const height = 620;
  const [view, setView] = useState<View>({ k: 1, fx: width / 2, fy: height / 2 });
  const [drag, setDrag] = useState<{ x: number; y: number; moved: boolean } | null>(null);
  const svgRef = useRef<SVGSVGElement>(null);
  const coarse = useLand(false);
  const fine = useLand(view.k >= FINE_COAST_ZOOM);
  const land = view.k >= FINE_COAST_ZOOM && fine.data ? fine : coarse;
  // A new datum to show starts from the fitted view.
  useEffect(() => setView({ k: 1, fx: width / 2, fy: height / 2 }), [focusDatum]);
  useEffect(() => {
    const el = svgRef.current;
    if (!el) return;
    const stop = (ev: WheelEvent) => ev.preventDefault();
    el.addEventListener('wheel', stop, { passive: false });
    return () => el.removeEventListener('wheel', stop);
  }, []);
  // The projection is fitted to the whole network, or to one datum's benchmarks (and the sites tied to them).
  const focus = focusDatum ? data.benchmarks.filter((b) => b.datumName === focusDatum) : data.benchmarks;
  const focusCodes = new Set(focus.map((b) => b.code));
  const coords: [number, number][] = [
    ...focus.map((b) => [b.longitudeDeg, b.latitudeDeg] as [number, number]),
    ...data.sites.filter((s) => !focusDatum || (s.benchmarkCode && focusCodes.has(s.benchmarkCode))).map((s) => [s.longitudeDeg, s.latitudeDeg] as [number, number]),
  ];
  const fitted = useMemo(() => geoMercator().fitExtent([[60, 40], [width - 60, height - 40]], { type: 'MultiPoint', coordinates: coords.length ? coords : [[0, 0]] }),
    // The coordinates change only with the data and the datum shown.
    // eslint-disable-next-line react-hooks/exhaustive-deps
    [data, focusDatum]);
  // Zoom = the fitted projection scaled by k about the fitted-map point (fx, fy), which lands in the centre.
  const [t0x, t0y] = fitted.translate();
  const projection = geoMercator().scale(fitted.scale() * view.k).translate([view.k * (t0x - view.fx) + width / 2, view.k * (t0y - view.fy) + height / 2]).clipExtent([[-20, -20], [width + 20, height + 20]]);
  const path = geoPath(projection);
  const landPath = useMemo(() => (land.data ? (path(land.data) ?? '') : ''),
    // The path depends on the land data and the view only.
    // eslint-disable-next-line react-hooks/exhaustive-deps
    [land.data, view.k, view.fx, view.fy, fitted]);
  if (coords.length === 0) return <p className="text-sm text-ink-500">Nothing to draw yet.</p>;

  const toSvg = (clientX: number, clientY: number) => {
    const r = svgRef.current!.getBoundingClientRect();
    return [((clientX - r.left) / r.width) * width, ((clientY - r.top) / r.height) * height] as const;
  };
  const zoomAt = (sx: number, sy: number, factor: number) => setView((v) => {
    const k = Math.min(MAX_ZOOM, Math.max(1, v.k * factor));
    // Keep the fitted-map point under (sx, sy) where it is.
    const bx = (sx - width / 2) / v.k + v.fx;
    const by = (sy - height / 2) / v.k + v.fy;
    return k === 1 ? { k, fx: width / 2, fy: height / 2 } : { k, fx: bx - (sx - width / 2) / k, fy: by - (sy - height / 2) / k };
  });
  const panBy = (dx: number, dy: number) => setView((v) => ({ ...v, fx: v.fx - dx / v.k, fy: v.fy - dy / v.k }));
  const onWheel = (e: React.WheelEvent<SVGSVGElement>) => {
    if (!e.deltaY) return;
    const [sx, sy] = toSvg(e.clientX, e.clientY);
    zoomAt(sx, sy, e.deltaY < 0 ? 1.25 : 0.8);
  };
  const onPointerDown = (e: ReactPointerEvent<SVGSVGElement>) => {
    if (e.button !== 0) return;
    setDrag({ x: e.clientX, y: e.clientY, moved: false });
  };
  const onPointerMove = (e: ReactPointerEvent<SVGSVGElement>) => {
    if (!drag) return;
    const r = svgRef.current!.getBoundingClientRect();
    const dx = ((e.clientX - drag.x) / r.width) * width;
    const dy = ((e.clientY - drag.y) / r.height) * height;
    if (!drag.moved && Math.hypot(dx, dy) < 4) return;
    if (!drag.moved) e.currentTarget.setPointerCapture(e.pointerId);
    panBy(dx, dy);
    setDrag({ x: e.clientX, y: e.clientY, moved: true });
  };
  const onKeyDown = (e: ReactKeyboardEvent<SVGSVGElement>) => {
    if (e.target !== e.currentTarget) return;
    const moves: Record<string, () => void> = {
      '+': () => zoomAt(width / 2, height / 2, 1.5), '=': () => zoomAt(width / 2, height / 2, 1.5), '-': () => zoomAt(width / 2, height / 2, 1 / 1.5),
      ArrowLeft: () => panBy(80, 0), ArrowRight: () => panBy(-80, 0), ArrowUp: () => panBy(0, 80), ArrowDown: () => panBy(0, -80),
      '0': () => setView({ k: 1, fx: width / 2, fy: height / 2 }),
    };
    if (Object.hasOwn(moves, e.key)) {
      e.preventDefault();
      moves[e.key]();
    }
  };
  const bm = new Map(data.benchmarks.map((b) => [b.code, b]));
  const sites = new Map(data.sites.map((s) => [s.id, s]));
  const p = (lon: number, lat: number) => projection([lon, lat]) ?? [0, 0];
  const xy = new Map(data.benchmarks.map((b) => [b.id, p(b.longitudeDeg, b.latitudeDeg)]));
  const siteXy = new Map(data.sites.map((s) => [s.id, p(s.longitudeDeg, s.latitudeDeg)]));
  // Symbols are obstacles, so no label hides a point; sites get their names first, then fixed, then free benchmarks.
  const obstacles = [
    ...[...xy].map(([id, [x, y]]) => ({ id, x: x - 5, y: y - 5, w: 10, h: 10 })),
    ...[...siteXy].map(([id, [x, y]]) => ({ id, x: x - 8, y: y - 8, w: 16, h: 16 })),
  ];
  const rank = (b: NetworkMap['benchmarks'][number]) => (selected?.kind === 'benchmark' && selected.id === b.id ? 0 : b.destroyed ? 3 : b.fixed ? 1 : 2);
  const ranked = [...data.benchmarks].sort((a, b) => rank(a) - rank(b) || a.code.localeCompare(b.code));
  const suspects = data.sections.flatMap((s) => {
    const a = bm.get(s.fromCode);
    const b = bm.get(s.toCode);
    if (!s.suspected || !a || !b) return [];
    const [x1, y1] = p(a.longitudeDeg, a.latitudeDeg);
    const [x2, y2] = p(b.longitudeDeg, b.latitudeDeg);
    return [{ id: `w:${s.id}`, x: (x1 + x2) / 2, y: (y1 + y2) / 2, text: `✕ w = ${s.standardizedResidual?.toFixed(1)}`, offset: 3, bold: true }];
  });
  const linkGeo = data.links.flatMap((l) => {
    const a = sites.get(l.fromSiteId);
    const b = sites.get(l.toSiteId);
    if (!a || !b) return [];
    const mid = geoInterpolate([a.longitudeDeg, a.latitudeDeg], [b.longitudeDeg, b.latitudeDeg])(0.5);
    const [mx, my] = p(mid[0], mid[1]);
    const note = linkNote(l);
    const text = note.length > l.label.length ? note : l.label;
    return [{ l, a, b, mx, my, note, label: { id: `l:${l.id}`, x: mx, y: my, text, lines: note ? 2 : 1, offset: 6 } }];
  });
  const labels = placeLabels([
    ...data.sites.map((s) => ({ id: s.id, x: siteXy.get(s.id)![0], y: siteXy.get(s.id)![1], text: s.name, offset: 11, bold: true })),
    ...linkGeo.map((g) => g.label),
    ...suspects,
    ...(ranked.length <= 400 ? ranked.map((b) => ({ id: b.id, x: xy.get(b.id)![0], y: xy.get(b.id)![1], text: b.code })) : []),
  ], obstacles, { width, height });
  // Scale: the ground distance of 100 px across the map's centre (spherical, R = 6371 km: enough for a scale bar).
  const [cx0, cy0] = [width / 2 - 50, height / 2];
  const west = projection.invert?.([cx0, cy0]);
  const east = projection.invert?.([cx0 + 100, cy0]);
  const bar = west && east ? scaleBarKm((geoDistance(west, east) * 6371) / 100) : null;
  const nw = projection.invert?.([0, 0]);
  const se = projection.invert?.([width, height]);
  const step = nw && se ? graticuleStepDeg(Math.max(se[0] - nw[0], nw[1] - se[1])) : null;
  const graticule = nw && se && step
    ? geoGraticule().extent([[Math.floor(nw[0] / step) * step - step, Math.floor(se[1] / step) * step - step], [Math.ceil(se[0] / step) * step + step, Math.ceil(nw[1] / step) * step + step]]).step([step, step])()
    : null;
  const meridians: number[] = [];
  const parallels: number[] = [];
  if (nw && se && step) {
    for (let lon = Math.ceil(nw[0] / step) * step; lon <= se[0]; lon += step) meridians.push(lon);
    for (let lat = Math.ceil(se[1] / step) * step; lat <= nw[1]; lat += step) parallels.push(lat);
  }
  const deg = (v: number) => `${+v.toFixed(2)}°`;
  const isSel = (kind: MapSelection['kind'], id: string) => selected?.kind === kind && selected.id === id;
  const key = (e: React.KeyboardEvent, s: MapSelection) => { if (e.key === 'Enter' || e.key === ' ') { e.preventDefault(); onSelect(s); } };
  return (
    <div className="relative">
    <svg ref={svgRef} role="group" aria-label="Map of the levelling network. Wheel or + and − to zoom, drag or arrow keys to pan, 0 to fit." tabIndex={0}
      viewBox={`0 0 ${width} ${height}`} data-testid="network-map" data-zoom={view.k.toFixed(2)} data-coast={land === fine && view.k >= FINE_COAST_ZOOM ? '10m' : '50m'}
      className={`w-full touch-none select-none rounded-md border border-paper-200 bg-[#e9f1f3] font-sans text-[10px] outline-none focus-visible:ring-2 focus-visible:ring-brass-400 ${drag?.moved ? 'cursor-grabbing' : 'cursor-grab'}`}
      onWheel={onWheel} onPointerDown={onPointerDown} onPointerMove={onPointerMove} onPointerUp={() => setDrag(null)} onPointerCancel={() => setDrag(null)} onKeyDown={onKeyDown}
      onClickCapture={(e) => { if (drag?.moved) e.stopPropagation(); }}>
      <defs><clipPath id="map-clip"><rect width={width} height={height} /></clipPath></defs>
      <g clipPath="url(#map-clip)">
        {land.data && <path d={landPath} className="fill-paper-100 stroke-ink-200" strokeWidth={0.6} data-testid="coastline" />}
        {graticule && <path d={path(graticule) ?? ''} fill="none" className="stroke-ink-300" strokeWidth={0.5} strokeOpacity={0.5} data-testid="graticule" />}
        <g aria-hidden className="fill-ink-500 text-[9px]">
          {meridians.map((lon) => <text key={`m${lon}`} x={p(lon, parallels[0] ?? 0)[0] + 2} y={10}>{deg(lon)} E</text>)}
          {parallels.map((lat) => <text key={`p${lat}`} x={2} y={p(meridians[0] ?? 0, lat)[1] - 2}>{deg(lat)} N</text>)}
        </g>
        {linkGeo.map(({ l, a, b, note }) => {
          const cls = linkClass(l);
          const at = labels.get(`l:${l.id}`);
          const geodesic = { type: 'LineString' as const, coordinates: [[a.longitudeDeg, a.latitudeDeg], [b.longitudeDeg, b.latitudeDeg]] };
          return (
            <g key={l.id} tabIndex={0} role="button" aria-label={`Fibre link ${l.label}`} onClick={() => onSelect({ kind: 'link', id: l.id })} onKeyDown={(e) => key(e, { kind: 'link', id: l.id })} className="cursor-pointer">
              <path d={path(geodesic) ?? ''} fill="none" stroke="transparent" strokeWidth={12} />
              <path d={path(geodesic) ?? ''} fill="none" className={cls} strokeWidth={isSel('link', l.id) ? 5 : 3} strokeDasharray="10 4 2 4" data-testid="link-path" />
              {at && (
                <text x={at.x} y={at.y} textAnchor={at.anchor} className="fill-ink-800" data-testid="link-label">
                  <tspan x={at.x}>{l.label}</tspan>
                  {note && <tspan x={at.x} dy={LINE_PX} className="fill-ink-600" data-testid="link-note">{note}</tspan>}
                </text>
              )}
              <title>{[`Fibre link ${l.label} (drawn along the geodesic)`, ...l.comparisons.map((c) => `${c.campaignLabel}: ${c.en === null ? (c.verdict === 'not-comparable' ? 'not comparable (datums not connected by levelling)' : 'no Eₙ') : `Eₙ ${c.en.toFixed(2)}`}`)].join('\n')}</title>
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
              <title>{`Section ${s.fromCode} → ${s.toCode}${s.lineName ? ` (${s.lineName})` : ''}: ${st.label}${s.standardizedResidual !== null ? `, w = ${s.standardizedResidual.toFixed(2)}` : ''}`}</title>
              {labels.has(`w:${s.id}`) && (
                <text x={labels.get(`w:${s.id}`)!.x} y={labels.get(`w:${s.id}`)!.y} textAnchor={labels.get(`w:${s.id}`)!.anchor} className="fill-disagree-800 font-semibold">✕ w = {s.standardizedResidual?.toFixed(1)}</text>
              )}
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
              <title>{`${b.code} ${b.name} (${b.datumName})`}</title>
              {labels.has(b.id)
                ? <text x={labels.get(b.id)!.x} y={labels.get(b.id)!.y} textAnchor={labels.get(b.id)!.anchor} className={sel ? 'fill-ink-900 font-semibold' : 'fill-ink-700'}>{b.code}</text>
                : null}
            </g>
          );
        })}
        {data.sites.map((s) => {
          const [x, y] = p(s.longitudeDeg, s.latitudeDeg);
          return (
            <g key={s.id} tabIndex={0} role="button" aria-label={`Clock site ${s.code} ${s.name}`} onClick={() => onSelect({ kind: 'site', id: s.id })} onKeyDown={(e) => key(e, { kind: 'site', id: s.id })} className="cursor-pointer">
              <circle cx={x} cy={y} r={7.5} className="fill-brass-400 stroke-ink-800" strokeWidth={isSel('site', s.id) ? 2.5 : 1.2} data-testid="site-symbol" />
              <path d={clockSymbolPath(x, y)} className="fill-none stroke-ink-900" strokeWidth={1.4} strokeLinecap="round" />
              <title>{`${s.code} · ${s.name}${s.benchmarkCode ? ` (tied to ${s.benchmarkCode})` : ''}`}</title>
              {labels.has(s.id) && <text x={labels.get(s.id)!.x} y={labels.get(s.id)!.y} textAnchor={labels.get(s.id)!.anchor} className="fill-ink-900 font-semibold">{s.name}</text>}
            </g>
          );
        })}
      </g>
      {bar && (
        <g aria-label={`Scale bar: ${bar.km} km`} data-testid="scale-bar" transform={`translate(16, ${height - 22})`}>
          <rect x={-6} y={-14} width={bar.px + 52} height={26} rx={3} className="fill-white" fillOpacity={0.8} />
          <path d={`M0,0 L${bar.px},0 M0,-5 L0,5 M${bar.px},-5 L${bar.px},5 M${bar.px / 2},-3 L${bar.px / 2},3`} className="stroke-ink-800" strokeWidth={1.5} />
          <text x={bar.px + 6} y={4} className="fill-ink-800">{bar.km} km</text>
        </g>
      )}
    </svg>
    <div className="absolute right-2 top-2 flex flex-col gap-1" role="toolbar" aria-label="Map zoom">
      {([['Zoom in', '+', () => zoomAt(width / 2, height / 2, 1.5), view.k >= MAX_ZOOM], ['Zoom out', '−', () => zoomAt(width / 2, height / 2, 1 / 1.5), view.k <= 1],
        ['Fit the network', '⤢', () => setView({ k: 1, fx: width / 2, fy: height / 2 }), view.k === 1 && view.fx === width / 2 && view.fy === height / 2]] as const).map(([label, sym, act, off]) => (
        <button key={label} type="button" aria-label={label} title={label} disabled={off} onClick={act}
          className="h-8 w-8 rounded border border-ink-200 bg-white/90 text-base leading-none text-ink-800 shadow-sm hover:bg-paper-100 disabled:opacity-40">{sym}</button>
      ))}
    </div>
    </div>
  );
}

/** The legend repeats every symbol with words. */
export function NetworkMapLegend() {
  const rows: [React.ReactNode, string][] = [
    [<rect key="r" x={4} y={2} width={10} height={10} className="fill-ink-800" />, 'fixed benchmark (datum point)'],
    [<circle key="c" cx={9} cy={7} r={4} className="fill-white stroke-ink-700" strokeWidth={1.5} />, 'free benchmark'],
    [<path key="x" d="M5,3 L13,11 M5,11 L13,3" className="stroke-disagree-800" strokeWidth={2} />, 'destroyed benchmark'],
    [<g key="t"><circle cx={9} cy={7} r={6} className="fill-brass-400 stroke-ink-800" /><path d={clockSymbolPath(9, 7, 6)} className="fill-none stroke-ink-900" strokeWidth={1.2} strokeLinecap="round" /></g>, 'clock site (dial)'],
    ...(['ink', 'brass', 'disagree', 'uncontrolled', 'none'] as const).map((k): [React.ReactNode, string] => {
      const st = k === 'ink' ? sectionStyle(0.5, false) : k === 'brass' ? sectionStyle(2.5, false) : k === 'disagree' ? sectionStyle(5, true) : k === 'uncontrolled' ? sectionStyle(null, false) : sectionStyle(null, false, false);
      return [<line key={k} x1={0} y1={7} x2={18} y2={7} className={st.cls} strokeWidth={st.width} strokeDasharray={st.dash} />, `section: ${st.label}`];
    }),
    [<line key="a" x1={0} y1={7} x2={18} y2={7} className="stroke-agree-600" strokeWidth={3} strokeDasharray="10 4 2 4" />, 'fibre link along the geodesic, clock and levelling agree (|Eₙ| ≤ 1)'],
    [<line key="d" x1={0} y1={7} x2={18} y2={7} className="stroke-disagree-600" strokeWidth={3} strokeDasharray="10 4 2 4" />, 'fibre link, |Eₙ| > 1'],
    [<line key="n" x1={0} y1={7} x2={18} y2={7} className="stroke-ink-400" strokeWidth={3} strokeDasharray="10 4 2 4" />, 'fibre link, no comparison yet, or not comparable (datums not connected by levelling)'],
    [<path key="g" d="M0,4 L18,4 M0,11 L18,11 M6,0 L6,14" className="stroke-ink-300" strokeWidth={0.7} />, 'graticule (degrees, GRS80/ETRS89)'],
  ];
  return (
    <ul className="space-y-1 text-xs" aria-label="Map legend">
      {rows.map(([sym, text]) => (
        <li key={text} className="flex items-center gap-2"><svg width={20} height={14} aria-hidden>{sym}</svg>{text}</li>
      ))}
    </ul>
  );
}
