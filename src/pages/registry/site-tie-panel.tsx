import { useState } from 'react';
import type { Site } from '../../../shared/registry';
import { useBenchmarks } from '../../api/network';
import { useUpdateSite } from '../../api/registry';
import { Button, Field, inputClass, Panel } from '../../components/ui';
import { describeError } from '../../lib/api-client';
import { Facts, fixed } from './registry-ui';

// The site's local tie to a levelling benchmark, set from the site page: with a tie the site's clock campaigns
// enter the reconciliation with the levelling network (the tie becomes an observation of the adjustment).

export function SiteTiePanel({ site: s, canEdit }: { site: Site; canEdit: boolean }) {
  const [editing, setEditing] = useState(false);
  const benchmarks = useBenchmarks({ page: 1, pageSize: 500, order: 'asc', sort: 'code', q: '' });
  const update = useUpdateSite();
  const [code, setCode] = useState(s.benchmarkTie?.benchmarkCode ?? '');
  const [dh, setDh] = useState(s.benchmarkTie ? String(s.benchmarkTie.heightDifferenceM) : '');
  const [u, setU] = useState(s.benchmarkTie ? String(s.benchmarkTie.uncertaintyM) : '');
  const dhValue = Number(dh);
  const uValue = Number(u);
  const ready = code !== '' && dh.trim() !== '' && Number.isFinite(dhValue) && u.trim() !== '' && Number.isFinite(uValue) && uValue >= 0;
  const save = (tie: { benchmarkCode: string; heightDifferenceM: number; uncertaintyM: number } | null) =>
    update.mutate({ id: s.id, body: { benchmarkTie: tie } }, { onSuccess: () => setEditing(false) });
  return (
    <Panel title="Local tie to a benchmark" actions={canEdit && !editing ? <Button variant="quiet" onClick={() => setEditing(true)}>{s.benchmarkTie ? 'Change the tie…' : 'Tie to a benchmark…'}</Button> : undefined}>
      {s.benchmarkTie ? (
        <Facts items={[
          ['Benchmark', s.benchmarkTie.benchmarkCode],
          ['Height difference site − benchmark Δh', `${fixed(s.benchmarkTie.heightDifferenceM, 4)} m`],
          ['Standard uncertainty σ(Δh)', `${fixed(s.benchmarkTie.uncertaintyM, 4)} m (k = 1)`],
        ]} />
      ) : <p className="text-sm text-ink-500" data-testid="no-tie">No tie recorded: this site’s campaigns cannot be reconciled with levelling until it is tied to a benchmark.</p>}
      {editing && (
        <form className="mt-4 grid gap-3 border-t border-paper-200 pt-4 md:grid-cols-3" data-testid="tie-form"
          onSubmit={(e) => { e.preventDefault(); if (ready) save({ benchmarkCode: code, heightDifferenceM: dhValue, uncertaintyM: uValue }); }}>
          <Field label="Benchmark" hint={benchmarks.isError ? describeError(benchmarks.error) : 'From the levelling network'}>
            <select className={inputClass} value={code} onChange={(e) => setCode(e.target.value)}>
              <option value="">choose…</option>
              {benchmarks.data?.items.filter((b) => b.state !== 'destroyed').map((b) => <option key={b.id} value={b.code}>{b.code} · {b.name} ({b.datumName})</option>)}
            </select>
          </Field>
          <Field label="Δh = site reference point − benchmark (m)" hint="Levelled or surveyed height difference">
            <input className={`${inputClass} font-mono`} inputMode="decimal" value={dh} onChange={(e) => setDh(e.target.value)} />
          </Field>
          <Field label="σ(Δh), standard uncertainty (m, k = 1)">
            <input className={`${inputClass} font-mono`} inputMode="decimal" value={u} onChange={(e) => setU(e.target.value)} />
          </Field>
          {update.isError && <p role="alert" className="text-sm text-disagree-800 md:col-span-3">{describeError(update.error)}</p>}
          <div className="flex gap-2 md:col-span-3">
            <Button type="submit" disabled={!ready || update.isPending}>Save the tie</Button>
            {s.benchmarkTie && <Button type="button" variant="danger" disabled={update.isPending} onClick={() => save(null)}>Remove the tie</Button>}
            <Button type="button" variant="quiet" onClick={() => setEditing(false)}>Cancel</Button>
          </div>
        </form>
      )}
    </Panel>
  );
}
