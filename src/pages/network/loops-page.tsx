import { useState } from 'react';
import { useDatums, useLoops } from '../../api/network';
import { EmptyState, inputClass, Panel } from '../../components/ui';
import { fmt } from './format';
import { NetworkNav } from './network-nav';

export function LoopsPage() {
  const datums = useDatums();
  const [datumId, setDatumId] = useState<string>('');
  const loops = useLoops(datumId || undefined);
  const r = loops.data;
  return (
    <>
      <h1>Loop misclosures</h1>
      <NetworkNav />
      <Panel title="Loops" actions={
        <label className="flex items-center gap-2 text-sm">Datum
          <select aria-label="Datum" className={`${inputClass} w-56`} value={datumId} onChange={(e) => setDatumId(e.target.value)}>
            <option value="">all datums</option>
            {datums.data?.map((d) => <option key={d.id} value={d.id}>{d.name}</option>)}
          </select>
        </label>
      }>
        {r && (
          <p className="mb-3 text-sm text-ink-600">
            {r.independentLoops} independent loops · tolerance t·√L with L in km ({r.toleranceSource}) ·
            misclosures in mm use ḡ = {fmt(r.meanGravity_ms2, 4)} m/s² ·{' '}
            <strong className={r.failing ? 'text-disagree-600' : 'text-agree-800'}>{r.failing ? `${r.failing} over tolerance` : 'all within tolerance'}</strong>
          </p>
        )}
        {r && r.loops.length === 0 && <EmptyState title="No loops">The sections form no closed loop yet.</EmptyState>}
        <ol className="space-y-2">
          {r?.loops.map((l, i) => (
            <li key={i} data-testid="loop" className={`rounded-md border px-3 py-2 text-sm ${l.passed ? 'border-paper-200' : 'border-disagree-600 bg-disagree-100'}`}>
              <p className="font-medium">
                {l.passed ? '✓ within tolerance' : '✕ over tolerance'} · misclosure {fmt(l.misclosureMm, 1)} mm ({fmt(l.misclosure_m2s2, 4)} m²/s²) ·
                tolerance ±{fmt(l.toleranceMm, 1)} mm · length {fmt(l.lengthKm, 1)} km
              </p>
              <p className="text-xs text-ink-600">
                {l.sections.map((s) => `${s.reversed ? `${s.toCode} → ${s.fromCode}` : `${s.fromCode} → ${s.toCode}`}${s.lineName ? ` (${s.lineName})` : ''}`).join(' · ')}
              </p>
            </li>
          ))}
        </ol>
      </Panel>
    </>
  );
}
