import { useParams } from 'react-router';
import { useMe } from '../../api/account';
import { useBenchmark } from '../../api/network';
import { Panel } from '../../components/ui';
import { fmt } from './format';
import { BenchmarkForm } from './network-page';
import { NetworkNav } from './network-nav';

export function BenchmarkPage() {
  const { id = '' } = useParams();
  const me = useMe();
  const b = useBenchmark(id).data;
  if (!b) return <p>Loading…</p>;
  return (
    <>
      <h1>Benchmark {b.code}</h1>
      <NetworkNav />
      <Panel title={b.name}>
        <dl className="grid grid-cols-[auto_1fr] gap-x-6 gap-y-1 text-sm">
          <dt className="text-ink-500">Datum</dt><dd>{b.datumName}</dd>
          <dt className="text-ink-500">Entered position</dt><dd>{b.coordinates.join(', ')} in {b.crs}</dd>
          <dt className="text-ink-500">GRS80</dt><dd>{fmt(b.latitudeDeg, 7)}°, {fmt(b.longitudeDeg, 7)}°, h = {fmt(b.ellipsoidalHeightM, 3)} m</dd>
          <dt className="text-ink-500">Known height</dt>
          <dd>{b.knownC_m2s2 === null ? 'not known' : `C = ${fmt(b.knownC_m2s2, 4)} m²/s² · H = ${fmt(b.knownNormalHeightM, 4)} m ± ${fmt((b.knownUncertaintyM ?? 0) * 1000, 1)} mm (entered as ${b.knownEnteredAs}; standard uncertainty)`}</dd>
          <dt className="text-ink-500">Datum role</dt><dd>{b.fixed ? '■ fixed' : 'free'}</dd>
          <dt className="text-ink-500">State</dt><dd>{b.state === 'destroyed' ? '✕ destroyed' : 'in use'}</dd>
          <dt className="text-ink-500">Monumentation</dt><dd>{b.monumentation ?? '—'}</dd>
        </dl>
        {me.data?.role === 'coordinator' && (
          <BenchmarkForm id={b.id} initial={{
            code: b.code, name: b.name, datumId: b.datumId, crs: b.crs, coordinates: b.coordinates.join(', '),
            knownKind: b.knownEnteredAs ?? '', knownValue: b.knownEnteredAs === 'C' ? String(b.knownC_m2s2) : b.knownEnteredAs === 'H' ? String(b.knownNormalHeightM) : '',
            knownUncertainty: b.knownEnteredAs === 'C' ? String(b.knownUncertaintyC_m2s2) : b.knownEnteredAs === 'H' ? String(b.knownUncertaintyM) : '',
            fixed: b.fixed, monumentation: b.monumentation ?? '', state: b.state,
          }} />
        )}
      </Panel>
    </>
  );
}
