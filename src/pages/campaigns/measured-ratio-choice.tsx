import { useState } from 'react';
import type { Campaign } from '../../../shared/campaigns';
import { useUpdateCampaign } from '../../api/campaigns';
import { useMeasuredRatios } from '../../api/measured-ratios';
import { Button, Field, inputClass } from '../../components/ui';
import { describeError } from '../../lib/api-client';
import { selectClass } from '../registry/registry-ui';

/** For an inter-species campaign: use a registered, directly measured ratio (ν_B/ν_A or its reciprocal) as R₀. */
export function MeasuredRatioChoice({ campaign: c }: { campaign: Campaign }) {
  const ratios = useMeasuredRatios();
  const update = useUpdateCampaign();
  const [id, setId] = useState('');
  const [justification, setJustification] = useState('');
  const fitting = (ratios.data ?? []).filter(
    (r) => (r.numeratorSpecies === c.clockB.species && r.denominatorSpecies === c.clockA.species) || (r.numeratorSpecies === c.clockA.species && r.denominatorSpecies === c.clockB.species),
  );
  if (c.clockA.species === c.clockB.species) return null;
  return (
    <form className="mt-4 grid gap-3 border-t border-paper-200 pt-4 md:grid-cols-3" aria-label="Use a measured ratio" onSubmit={(ev) => {
      ev.preventDefault();
      update.mutate({ id: c.id, body: { referenceRatio: { measuredRatioId: id, justification } } });
    }}>
      <p className="text-sm font-semibold text-ink-700 md:col-span-3">Use a directly measured optical frequency ratio</p>
      {fitting.length === 0 ? (
        <p className="text-sm text-ink-500 md:col-span-3">No measured ratio for this pair of species is registered (Reference data).</p>
      ) : (
        <>
          <Field label="Measured ratio">
            <select className={selectClass} value={id} onChange={(e) => setId(e.target.value)}>
              <option value="">choose…</option>
              {fitting.map((r) => <option key={r.id} value={r.id}>{r.label} = {r.value} (u_r {r.relativeUncertainty.toExponential(1)}) — {r.source}</option>)}
            </select>
          </Field>
          <Field label="Justification (required)"><input className={inputClass} value={justification} onChange={(e) => setJustification(e.target.value)} /></Field>
          <div className="flex items-end"><Button type="submit" variant="quiet" disabled={!id || update.isPending}>Use this ratio</Button></div>
          {update.isError && <p className="text-sm text-disagree-600 md:col-span-3" role="alert">{describeError(update.error)}</p>}
        </>
      )}
    </form>
  );
}
