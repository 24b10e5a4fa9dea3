import { useState } from 'react';
import { Link } from 'react-router';
import { useDatums, useNetworkMap } from '../../api/network';
import { NetworkMapLegend, NetworkMapSvg, type MapSelection } from '../../components/plots/network-map';
import { Caution, inputClass, Panel } from '../../components/ui';
import { fmt } from './format';
import { NetworkNav } from './network-nav';

export function MapPage() {
  const map = useNetworkMap();
  const datums = useDatums();
  const [selected, setSelected] = useState<MapSelection | null>(null);
  const [focus, setFocus] = useState('');
  const d = map.data;
  return (
    <>
      <h1>Network map</h1>
      <NetworkNav />
      <div className="grid gap-4 lg:grid-cols-[1fr_260px]">
        <Panel actions={
          <label className="flex items-center gap-2 text-sm">Show
            <select aria-label="Show" className={`${inputClass} w-56`} value={focus} onChange={(e) => setFocus(e.target.value)}>
              <option value="">the whole network</option>
              {datums.data?.map((x) => <option key={x.id} value={x.name}>{x.name}</option>)}
            </select>
          </label>
        }>
          {d ? <NetworkMapSvg data={d} selected={selected} onSelect={setSelected} focusDatum={focus || undefined} /> : <p>Loading…</p>}
          <p className="mt-1 text-xs text-ink-500">Zoom with the wheel, the buttons or + and −; drag or use the arrow keys to pan; 0 fits the network again. Coastline: Natural Earth 1:50m, 1:10m once zoomed in (public domain, via world-atlas). Fibre links are drawn along the geodesic between their sites; the fibre itself runs elsewhere. Section colours come from the latest finished adjustment run. Labels that would overlap are left out and come back as you zoom in: hover or focus a symbol for its full name. Graticule in degrees; the scale bar holds near the map's centre (Mercator).</p>
        </Panel>
        <div className="space-y-4">
          <Panel title="Selected">{d && <SelectionDetail data={d} selected={selected} />}</Panel>
          <Panel title="Legend"><NetworkMapLegend /></Panel>
        </div>
      </div>
      <Caution>
        Agreement colours use Eₙ with expanded uncertainties (coverage factor k = 2) and the latest finished adjustment; positions are as registered, not surveyed here.
        Verify against your national datum authority and your lab’s quality procedures before any use for heights.
      </Caution>
    </>
  );
}

function SelectionDetail({ data, selected }: { data: NonNullable<ReturnType<typeof useNetworkMap>['data']>; selected: MapSelection | null }) {
  if (!selected) return <p className="text-sm text-ink-500">Click or press Enter on a benchmark, section, site or link.</p>;
  if (selected.kind === 'benchmark') {
    const b = data.benchmarks.find((x) => x.id === selected.id);
    if (!b) return null;
    return (
      <div className="text-sm" data-testid="map-selection">
        <p className="font-semibold">{b.code} · {b.name}</p>
        <p>{b.datumName} · {b.fixed ? 'fixed' : 'free'}{b.destroyed ? ' · destroyed' : ''}</p>
        <p>{fmt(b.latitudeDeg, 5)}° N, {fmt(b.longitudeDeg, 5)}° E</p>
        <Link to={`/network/benchmarks/${b.id}`}>Open the benchmark →</Link>
      </div>
    );
  }
  if (selected.kind === 'section') {
    const s = data.sections.find((x) => x.id === selected.id);
    if (!s) return null;
    return (
      <div className="text-sm" data-testid="map-selection">
        <p className="font-semibold">Section {s.fromCode} → {s.toCode}</p>
        <p>{s.lineName ?? 'no line name'}</p>
        <p>standardised residual w = {fmt(s.standardizedResidual, 2)}{s.suspected ? ' · ✕ suspected' : ''}</p>
        {data.runId && <Link to={`/network/runs/${data.runId}`}>Open the adjustment run →</Link>}
      </div>
    );
  }
  if (selected.kind === 'site') {
    const s = data.sites.find((x) => x.id === selected.id);
    if (!s) return null;
    return (
      <div className="text-sm" data-testid="map-selection">
        <p className="font-semibold">{s.code} · {s.name}</p>
        <p>tied to benchmark {s.benchmarkCode ?? '— (no tie)'}</p>
        <p>{fmt(s.latitudeDeg, 5)}° N, {fmt(s.longitudeDeg, 5)}° E</p>
      </div>
    );
  }
  const l = data.links.find((x) => x.id === selected.id);
  if (!l) return null;
  return (
    <div className="text-sm" data-testid="map-selection">
      <p className="font-semibold">Fibre link {l.label}</p>
      {l.comparisons.length === 0 && <p>No compared campaign yet.</p>}
      <ul>
        {l.comparisons.map((c) => (
          <li key={c.campaignLabel}>{c.campaignLabel}: {c.verdict === 'not-comparable' ? 'not comparable — datums not connected by levelling' : c.en === null ? 'no Eₙ' : `Eₙ = ${fmt(c.en, 2)}`}</li>
        ))}
      </ul>
      <Link to="/network/reconciliation">Open the reconciliation →</Link>
    </div>
  );
}
