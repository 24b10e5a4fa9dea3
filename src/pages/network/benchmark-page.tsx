import { Link, useParams } from 'react-router';
import { useMe } from '../../api/account';
import { useQuery } from '@tanstack/react-query';
import { networkKeys, useBenchmark, useRuns, useSections } from '../../api/network';
import { api } from '../../lib/api-client';
import { Panel } from '../../components/ui';
import type { AdjustmentRunDetail, Benchmark } from '../../../shared/network';
import { fmt, when } from './format';
import { BenchmarkForm } from './network-page';
import { NetworkNav } from './network-nav';

export function BenchmarkPage() {
  const { id = '' } = useParams();
  const me = useMe();
  const b = useBenchmark(id).data;
  // The latest finished run gives the adjusted height; sections are found by code (the filter matches substrings).
  const runs = useRuns({ page: 1, pageSize: 20 });
  const latest = runs.data?.items.find((r) => r.state === 'done');
  const run = useQuery({ queryKey: networkKeys.run(latest?.id ?? ''), queryFn: () => api<AdjustmentRunDetail>(`/api/v1/network/runs/${latest!.id}`), enabled: !!latest });
  const sections = useSections({ page: 1, pageSize: 500, sort: 'lineName', order: 'asc', q: b?.code ?? '' });
  if (!b) return <p>Loading…</p>;
  const adjusted = latest ? run.data?.result?.points.find((p) => p.code === b.code) : undefined;
  const connected = (sections.data?.items ?? []).filter((s) => s.fromCode === b.code || s.toCode === b.code);
  return (
    <>
      <h1>Benchmark {b.code}</h1>
      <NetworkNav />
      <Panel title={b.name}>
        <dl className="grid grid-cols-[auto_1fr] gap-x-6 gap-y-1 text-sm">
          <dt className="text-ink-500">Datum</dt><dd>{b.datumName}</dd>
          <dt className="text-ink-500">Entered position</dt><dd data-testid="entered-position">{enteredPosition(b)}</dd>
          <dt className="text-ink-500">GRS80</dt><dd>latitude {fmt(b.latitudeDeg, 7)}°, longitude {fmt(b.longitudeDeg, 7)}°, ellipsoidal height h = {fmt(b.ellipsoidalHeightM, 3)} m</dd>
          <dt className="text-ink-500">Known height</dt>
          <dd data-testid="known-height">{b.knownC_m2s2 === null ? 'not known' : (
            <>C = {fmt(b.knownC_m2s2, 4)} ± {fmt(b.knownUncertaintyC_m2s2, 4)} m²/s² · H = {fmt(b.knownNormalHeightM, 4)} ± {fmt(b.knownUncertaintyM, 4)} m
              <span className="block text-xs text-ink-500">entered as {b.knownEnteredAs}; {b.knownTideSystem ?? 'tide system not stated'}; ± is the standard uncertainty (k = 1)</span></>
          )}</dd>
          <dt className="text-ink-500">Adjusted height</dt>
          <dd data-testid="adjusted-height">{!latest ? 'no finished adjustment run yet' : !run.data ? 'loading…' : !adjusted ? 'not in the latest adjustment run (no section reaches it)' : (
            <>C = {fmt(adjusted.c_m2s2, 4)} ± {fmt(adjusted.sigmaC_m2s2, 4)} m²/s² · H = {fmt(adjusted.normalHeightM, 4)} ± {fmt(adjusted.sigmaHeightM, 4)} m
              <span className="block text-xs text-ink-500">
                ± is the standard deviation (k = 1) · {adjusted.datum === 'held' ? 'held fixed' : adjusted.datum} ·{' '}
                <Link to={`/network/runs/${latest.id}`}>adjustment run of {when(latest.createdAt)}</Link>
                {latest.globalTestPassed === false && ' · ✕ that run failed its global test: provisional'}
              </span></>
          )}</dd>
          <dt className="text-ink-500">Datum role</dt><dd>{b.fixed ? '■ fixed' : 'free'}</dd>
          <dt className="text-ink-500">State</dt><dd>{b.state === 'destroyed' ? '✕ destroyed' : 'in use'}</dd>
          <dt className="text-ink-500">Monumentation</dt><dd>{b.monumentation ?? '—'}</dd>
        </dl>
        {me.data?.role === 'coordinator' && (
          <BenchmarkForm id={b.id} initial={{
            code: b.code, name: b.name, datumId: b.datumId, crs: b.crs, coordinates: b.coordinates.map(typed).join(', '),
            knownKind: b.knownEnteredAs ?? '', knownValue: b.knownEnteredAs === 'C' ? String(b.knownC_m2s2) : b.knownEnteredAs === 'H' ? String(b.knownNormalHeightM) : '',
            knownTideSystem: b.knownTideSystem ?? '',
            knownUncertainty: b.knownEnteredAs === 'C' && b.knownUncertaintyC_m2s2 !== null ? typed(b.knownUncertaintyC_m2s2) : b.knownEnteredAs === 'H' && b.knownUncertaintyM !== null ? typed(b.knownUncertaintyM) : '',
            fixed: b.fixed, monumentation: b.monumentation ?? '', state: b.state,
          }} />
        )}
      </Panel>
      <Panel title={`Sections connected to ${b.code}`}>
        {connected.length === 0 ? <p className="text-sm text-ink-500">{sections.data ? 'No levelling section reaches this benchmark.' : 'Loading…'}</p> : (
          <table className="min-w-full text-sm" data-testid="benchmark-sections">
            <thead className="text-left text-ink-600">
              <tr><th className="py-1 pr-4">Line</th><th className="pr-4">From → to</th><th className="pr-4 text-right">Δn (m)</th><th className="pr-4 text-right">Length (km)</th><th className="pr-4 text-right">ΔC (m²/s²)</th><th>Forward/backward</th></tr>
            </thead>
            <tbody>
              {connected.map((s) => (
                <tr key={s.id} className="border-t border-paper-200">
                  <td className="py-1 pr-4">{s.lineName ?? '—'}</td><td className="pr-4">{s.fromCode} → {s.toCode}</td>
                  <td className="pr-4 text-right tabular-nums">{fmt(s.deltaHeightM, 5)}</td><td className="pr-4 text-right tabular-nums">{fmt(s.lengthKm, 2)}</td>
                  <td className="pr-4 text-right tabular-nums">{fmt(s.deltaC_m2s2, 4)}</td>
                  <td>{s.runCheckPassed === null ? '—' : s.runCheckPassed ? '✓ within tolerance' : '✕ over tolerance'}</td>
                </tr>
              ))}
            </tbody>
          </table>
        )}
      </Panel>
    </>
  );
}

/** Each entered value with its axis and unit, in the order it was entered (proj4's order: longitude first). */
/** Twelve significant digits: what was typed, without binary floating-point tails such as 46.199999999999996. */
const typed = (v: number) => String(+v.toPrecision(12));

function enteredPosition(b: Pick<Benchmark, 'coordinates' | 'crs' | 'crsKind' | 'crsLabel'>): string {
  const c = b.coordinates.map(typed);
  const crs = b.crsLabel ? `${b.crs}, ${b.crsLabel}` : b.crs;
  switch (b.crsKind) {
    case 'geographic2D':
    case 'geographic3D':
      return `longitude ${c[0]}°, latitude ${c[1]}°${c.length > 2 ? `, ellipsoidal height h ${c[2]} m` : ''} (entered in ${crs}, longitude first as proj4 takes it)`;
    case 'projected':
      return `easting ${c[0]} m, northing ${c[1]} m${c.length > 2 ? `, ellipsoidal height h ${c[2]} m` : ''} (entered in ${crs})`;
    case 'geocentric':
      return `X ${c[0]} m, Y ${c[1]} m, Z ${c[2]} m (entered in ${crs})`;
    default:
      return `${c.join(', ')} (entered in ${crs})`;
  }
}
