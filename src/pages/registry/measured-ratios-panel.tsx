import { zodResolver } from '@hookform/resolvers/zod';
import { useState } from 'react';
import { useForm } from 'react-hook-form';
import { measuredRatioInput, type MeasuredRatioInput } from '../../../shared/measured-ratios';
import { speciesCodes, speciesLabels } from '../../../shared/registry';
import { useCreateMeasuredRatio, useMeasuredRatios } from '../../api/measured-ratios';
import { Button, Field, inputClass, Panel } from '../../components/ui';
import { applyServerErrors, FormError, sci, selectClass } from './registry-ui';

// Directly measured optical frequency ratios with their publication: a lab may choose one as a campaign's reference
// ratio; none is ever used by default.

export function MeasuredRatiosPanel({ coordinator }: { coordinator: boolean }) {
  const ratios = useMeasuredRatios();
  return (
    <Panel title="Measured frequency ratios">
      <p className="mb-2 text-sm text-ink-500">Directly measured ratios ν(numerator)/ν(denominator) as published. A campaign uses one only when its lab chooses it (with a justification); defaults always come from the reference frequencies above.</p>
      <table className="min-w-full text-sm" data-testid="measured-ratios">
        <thead className="text-left text-ink-500"><tr><th className="py-1 pr-4">Ratio</th><th className="pr-4">Value</th><th className="whitespace-nowrap pr-4">u_r (k = 1)</th><th>Publication</th></tr></thead>
        <tbody>
          {ratios.data?.map((r) => (
            <tr key={r.id} className="border-t border-paper-200 align-top">
              <td className="py-1.5 pr-4">{r.label}</td>
              <td className="pr-4 font-mono">{r.value}</td>
              <td className="pr-4 font-mono">{sci(r.relativeUncertainty, 2)}</td>
              <td>{r.source}</td>
            </tr>
          ))}
          {ratios.data?.length === 0 && <tr><td colSpan={4} className="py-2 text-ink-500">None registered.</td></tr>}
        </tbody>
      </table>
      {coordinator && <NewMeasuredRatioForm />}
    </Panel>
  );
}

function NewMeasuredRatioForm() {
  const create = useCreateMeasuredRatio();
  const [formError, setFormError] = useState<string | null>(null);
  const { register, handleSubmit, setError, reset, formState: { errors } } = useForm<MeasuredRatioInput>({
    resolver: zodResolver(measuredRatioInput) as never,
    defaultValues: { numeratorSpecies: 'Yb171+E3', denominatorSpecies: 'Sr87', value: '', source: '' },
  });
  return (
    <form className="mt-4 grid gap-3 border-t border-paper-200 pt-4 md:grid-cols-3" aria-label="New measured ratio" onSubmit={handleSubmit((body) => {
      setFormError(null);
      create.mutate(body, { onSuccess: () => reset(), onError: (e) => setFormError(applyServerErrors(e, setError, ['numeratorSpecies', 'denominatorSpecies', 'value', 'relativeUncertainty', 'source'])) });
    })}>
      <Field label="Numerator species" error={errors.numeratorSpecies?.message}>
        <select className={selectClass} {...register('numeratorSpecies')}>{speciesCodes.map((s) => <option key={s} value={s}>{speciesLabels[s]}</option>)}</select>
      </Field>
      <Field label="Denominator species" error={errors.denominatorSpecies?.message}>
        <select className={selectClass} {...register('denominatorSpecies')}>{speciesCodes.map((s) => <option key={s} value={s}>{speciesLabels[s]}</option>)}</select>
      </Field>
      <Field label="Ratio as published (decimal)" error={errors.value?.message}><input className={`${inputClass} font-mono`} {...register('value')} /></Field>
      <Field label="Relative standard uncertainty (k = 1)" error={errors.relativeUncertainty?.message}><input className={`${inputClass} font-mono`} {...register('relativeUncertainty', { setValueAs: (v: string) => (v === '' ? undefined : Number(v)) })} /></Field>
      <Field label="Publication (authors, journal, year, DOI)" error={errors.source?.message}><input className={inputClass} {...register('source')} /></Field>
      <div className="flex items-end"><Button type="submit" variant="quiet" disabled={create.isPending}>Register this ratio</Button></div>
      <div className="md:col-span-3"><FormError text={formError} /></div>
    </form>
  );
}
