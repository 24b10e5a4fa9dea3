import { useState } from 'react';
import type { Site } from '../../../shared/registry';
import { useBenchmarks } from '../../api/network';
import { useUpdateSite } from '../../api/registry';
import { Button, Field, inputClass, Panel } from '../../components/ui';
import { describeError } from '../../lib/api-client';
import { Facts, fixed } from './registry-ui';

// The site's local tie to a levelling benchmark, set from the site page: with a tie the site's clock campaigns
// enter the reconciliation with the levelling network (the tie becomes an observation of the adjustment).

type TieBody = { benchmarkCode: string; source?: string } & ({ heightDifferenceM: number; uncertaintyM: number } | { deltaC_m2s2: number; uncertaintyC_m2s2: number });

export function SiteTiePanel({ site: s, canEdit }: { site: Site; canEdit: boolean }) {
  const [editing, setEditing] = useState(false);
  const benchmarks = useBenchmarks({ page: 1, pageSize: 500, order: 'asc', sort: 'code', q: '' });
  const update = useUpdateSite();
  const t = s.benchmarkTie;
  const [code, setCode] = useState(t?.benchmarkCode ?? '');
  const [quantity, setQuantity] = useState<'height' | 'potential'>(t?.quantity ?? 'height');
  const [value, setValue] = useState(t ? String((t.quantity === 'potential' ? t.deltaC_m2s2 : t.heightDifferenceM) ?? '') : '');
  const [u, setU] = useState(t ? String((t.quantity === 'potential' ? t.uncertaintyC_m2s2 : t.uncertaintyM) ?? '') : '');
  const [source, setSource] = useState(t?.source ?? '');
  const num = Number(value);
  const uValue = Number(u);
  const ready = code !== '' && value.trim() !== '' && Number.isFinite(num) && u.trim() !== '' && Number.isFinite(uValue) && uValue >= 0
    && (quantity === 'height' || source.trim().length >= 2);
  const save = (tie: TieBody | null) =>
    update.mutate({ id: s.id, body: { benchmarkTie: tie } }, { onSuccess: () => setEditing(false) });
  const body = (): TieBody => ({
    benchmarkCode: code,
    ...(source.trim() ? { source: source.trim() } : {}),
    ...(quantity === 'height' ? { heightDifferenceM: num, uncertaintyM: uValue } : { deltaC_m2s2: num, uncertaintyC_m2s2: uValue }),
  });
  const unit = quantity === 'height' ? 'm' : 'm²/s²';
  return (
    <Panel title="Local tie to a benchmark" actions={canEdit && !editing ? <Button variant="quiet" onClick={() => setEditing(true)}>{t ? 'Change the tie…' : 'Tie to a benchmark…'}</Button> : undefined}>
      {t ? (
        <Facts items={[
          ['Benchmark', t.benchmarkCode],
          ...(t.quantity === 'potential'
            ? [
                ['Geopotential-number difference ΔC = C(site) − C(benchmark)', `${fixed(t.deltaC_m2s2 ?? 0, 4)} m²/s²`],
                ['Standard uncertainty σ(ΔC)', `${fixed(t.uncertaintyC_m2s2 ?? 0, 4)} m²/s² (k = 1)`],
              ] as [string, string][]
            : [
                ['Height difference site − benchmark Δh', `${fixed(t.heightDifferenceM ?? 0, 4)} m`],
                ['Standard uncertainty σ(Δh)', `${fixed(t.uncertaintyM ?? 0, 4)} m (k = 1)`],
              ] as [string, string][]),
          ['Source of the tie', t.source ?? 'not stated'],
        ]} />
      ) : <p className="text-sm text-ink-500" data-testid="no-tie">No tie recorded: this site’s campaigns cannot be reconciled with levelling until it is tied to a benchmark.</p>}
      {editing && (
        <form className="mt-4 grid gap-3 border-t border-paper-200 pt-4 md:grid-cols-3" data-testid="tie-form"
          onSubmit={(e) => { e.preventDefault(); if (ready) save(body()); }}>
          <Field label="Benchmark" hint={benchmarks.isError ? describeError(benchmarks.error) : 'From the levelling network'}>
            <select className={inputClass} value={code} onChange={(e) => setCode(e.target.value)}>
              <option value="">choose…</option>
              {benchmarks.data?.items.filter((b) => b.state !== 'destroyed').map((b) => <option key={b.id} value={b.code}>{b.code} · {b.name} ({b.datumName})</option>)}
            </select>
          </Field>
          <Field label="The tie is given as" hint="ΔC = C(site) − C(benchmark) ≈ γ·Δh (C = W₀ − W)">
            <select className={inputClass} value={quantity} onChange={(e) => setQuantity(e.target.value as 'height' | 'potential')} data-testid="tie-quantity">
              <option value="height">height difference Δh (m)</option>
              <option value="potential">geopotential-number difference ΔC (m²/s²)</option>
            </select>
          </Field>
          <Field label={quantity === 'height' ? 'Δh = site reference point − benchmark (m)' : 'ΔC = C(site) − C(benchmark) (m²/s²)'} hint={quantity === 'height' ? 'Levelled or surveyed height difference' : 'Positive when the site is higher'}>
            <input className={`${inputClass} font-mono`} inputMode="decimal" value={value} onChange={(e) => setValue(e.target.value)} data-testid="tie-value" />
          </Field>
          <Field label={`σ, standard uncertainty (${unit}, k = 1)`}>
            <input className={`${inputClass} font-mono`} inputMode="decimal" value={u} onChange={(e) => setU(e.target.value)} data-testid="tie-u" />
          </Field>
          <Field label="Source of the tie" hint={quantity === 'potential' ? 'Required: survey report, levelling file or publication' : 'Survey report or levelling file (recommended)'}>
            <input className={inputClass} value={source} maxLength={300} onChange={(e) => setSource(e.target.value)} data-testid="tie-source" />
          </Field>
          {update.isError && <p role="alert" className="text-sm text-disagree-800 md:col-span-3">{describeError(update.error)}</p>}
          <div className="flex gap-2 md:col-span-3">
            <Button type="submit" disabled={!ready || update.isPending}>Save the tie</Button>
            {t && <Button type="button" variant="danger" disabled={update.isPending} onClick={() => save(null)}>Remove the tie</Button>}
            <Button type="button" variant="quiet" onClick={() => setEditing(false)}>Cancel</Button>
          </div>
        </form>
      )}
    </Panel>
  );
}
