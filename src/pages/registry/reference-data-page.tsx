import { zodResolver } from '@hookform/resolvers/zod';
import { useState } from 'react';
import { useForm } from 'react-hook-form';
import { referenceFrequencyInput, speciesCodes, speciesLabels, type ReferenceFrequencyInput } from '../../../shared/registry';
import { useMe } from '../../api/account';
import { useCreateReference, useGrids, useReferences, useUpdateReference, useUploadGrid } from '../../api/registry';
import { Button, Field, inputClass, Panel } from '../../components/ui';
import { describeError } from '../../lib/api-client';
import { MeasuredRatiosPanel } from './measured-ratios-panel';
import { applyServerErrors, fixed, FormError, groupDigits, sci, selectClass } from './registry-ui';

// Reference frequencies (default reference ratios of campaigns) and quasigeoid grids; the coordinating institute keeps both.

export function ReferenceDataPage() {
  const me = useMe();
  const refs = useReferences();
  const grids = useGrids();
  const update = useUpdateReference();
  const coordinator = me.data?.role === 'coordinator';
  return (
    <>
      <header>
        <h1>Reference data</h1>
        <p className="text-sm text-ink-500">Frequencies used for the default reference ratio ν_B/ν_A of a campaign, and the quasigeoid grids sites may interpolate ζ from.</p>
      </header>
      <Panel title="Reference frequencies">
        <table className="min-w-full text-sm" data-testid="reference-frequencies">
          <thead className="text-left text-ink-500"><tr><th className="py-1 pr-4">Species / transition</th><th className="pr-4">Frequency (Hz)</th><th className="whitespace-nowrap pr-4">u_r (k = 1)</th><th className="pr-4">Source</th><th>Used for defaults</th>{coordinator && <th />}</tr></thead>
          <tbody>
            {refs.data?.map((r) => (
              <tr key={r.id} className={`border-t border-paper-200 align-top ${r.inUse ? '' : 'text-ink-500'}`}>
                <td className="py-1.5 pr-4">{r.speciesLabel}</td>
                <td className="whitespace-nowrap pr-4 font-mono" title={r.frequencyHz}>{groupDigits(r.frequencyHz)}</td>
                <td className="whitespace-nowrap pr-4 font-mono">{sci(r.relativeUncertainty, 2)}</td>
                <td className={`pr-4 ${/from memory/.test(r.source) ? 'text-brass-600' : ''}`}>{r.source}</td>
                <td>{r.inUse ? 'yes' : 'no'}</td>
                {coordinator && <td>{!r.inUse && <Button variant="quiet" onClick={() => update.mutate({ id: r.id, body: { inUse: true } })}>Use this value</Button>}</td>}
              </tr>
            ))}
          </tbody>
        </table>
        {update.isError && <FormError text={describeError(update.error)} />}
        {coordinator && <NewReferenceForm />}
      </Panel>
      <MeasuredRatiosPanel coordinator={coordinator} />
      <Panel title="Quasigeoid grids">
        <table className="min-w-full text-sm">
          <thead className="text-left text-ink-500 [&_th]:pr-4"><tr><th className="py-1">Name</th><th>Latitude (°)</th><th>Longitude (°)</th><th>Spacing (°)</th><th>Nodes</th><th>u(ζ), k = 1 (m)</th><th>Tide system</th><th>Correlation length</th><th>SHA-256</th><th>Uploaded</th></tr></thead>
          <tbody>
            {grids.data?.map((g) => (
              <tr key={g.id} className="border-t border-paper-200 [&_td]:pr-4">
                <td className="py-1.5">{g.name}</td>
                <td>{fixed(g.latitudeMinDeg, 3)} … {fixed(g.latitudeMaxDeg, 3)}</td>
                <td>{fixed(g.longitudeMinDeg, 3)} … {fixed(g.longitudeMaxDeg, 3)}</td>
                <td>{fixed(g.latitudeStepDeg, 4)} × {fixed(g.longitudeStepDeg, 4)}</td>
                <td>{g.nodeCount}</td>
                <td>{g.uncertaintyM}</td>
                <td>{g.tideSystem ?? 'not stated'}</td>
                <td>{g.correlationLengthKm ? `${g.correlationLengthKm} km` : '100 km (default)'}</td>
                <td className="font-mono text-xs">{g.sha256.slice(0, 12)}…</td>
                <td>{g.uploadedBy}, {g.createdAt.slice(0, 10)}</td>
              </tr>
            ))}
          </tbody>
        </table>
        {coordinator && <GridUpload />}
      </Panel>
    </>
  );
}

function NewReferenceForm() {
  const create = useCreateReference();
  const [formError, setFormError] = useState<string | null>(null);
  const { register, handleSubmit, setError, reset, formState: { errors } } = useForm<ReferenceFrequencyInput>({ resolver: zodResolver(referenceFrequencyInput) as never, defaultValues: { species: 'Sr87', inUse: true } });
  return (
    <form className="mt-4 grid gap-3 border-t border-paper-200 pt-4 md:grid-cols-5" onSubmit={handleSubmit((body) => {
      setFormError(null);
      create.mutate(body, { onSuccess: () => reset(), onError: (e) => setFormError(applyServerErrors(e, setError, ['species', 'frequencyHz', 'relativeUncertainty', 'source', 'inUse'])) });
    })}>
      <Field label="Species" error={errors.species?.message}><select className={selectClass} {...register('species')}>{speciesCodes.map((s) => <option key={s} value={s}>{speciesLabels[s]}</option>)}</select></Field>
      <Field label="Frequency (Hz, decimal)" error={errors.frequencyHz?.message}><input className={`${inputClass} font-mono`} {...register('frequencyHz')} /></Field>
      <Field label="u_r" error={errors.relativeUncertainty?.message}><input className={`${inputClass} font-mono`} {...register('relativeUncertainty', { setValueAs: (v: string) => (v === '' ? undefined : Number(v)) })} /></Field>
      <Field label="Edition / source" error={errors.source?.message}><input className={inputClass} {...register('source')} /></Field>
      <label className="flex items-end gap-2 text-sm"><input type="checkbox" {...register('inUse')} /> use for defaults</label>
      <div className="md:col-span-5"><FormError text={formError} /></div>
      <div className="md:col-span-5"><Button type="submit" disabled={create.isPending}>Add reference frequency</Button></div>
    </form>
  );
}

function GridUpload() {
  const upload = useUploadGrid();
  const [name, setName] = useState('');
  const [uncertainty, setUncertainty] = useState('0.03');
  const [tideSystem, setTideSystem] = useState('');
  const [corrKm, setCorrKm] = useState('');
  const [file, setFile] = useState<File | null>(null);
  return (
    <form className="mt-4 flex flex-wrap items-end gap-3 border-t border-paper-200 pt-4" onSubmit={async (e) => {
      e.preventDefault();
      if (!file) return;
      upload.mutate({
        name, uncertaintyM: Number(uncertainty), fileName: file.name, content: await file.text(),
        tideSystem: tideSystem === 'mean-tide' || tideSystem === 'zero-tide' || tideSystem === 'tide-free' ? tideSystem : null,
        correlationLengthKm: corrKm ? Number(corrKm) : null,
      });
    }}>
      <div className="w-64"><Field label="Grid name"><input className={inputClass} value={name} onChange={(e) => setName(e.target.value)} /></Field></div>
      <div className="w-32"><Field label="u(ζ), k = 1 (m)"><input className={inputClass} value={uncertainty} onChange={(e) => setUncertainty(e.target.value)} /></Field></div>
      <div className="w-40"><Field label="Tide system of ζ">
        <select className={inputClass} value={tideSystem} onChange={(e) => setTideSystem(e.target.value)}>
          <option value="">not stated</option><option>mean-tide</option><option>zero-tide</option><option>tide-free</option>
        </select>
      </Field></div>
      <div className="w-40"><Field label="Error correlation length (km)"><input className={inputClass} placeholder="100 (default)" value={corrKm} onChange={(e) => setCorrKm(e.target.value)} /></Field></div>
      <input aria-label="Grid file" type="file" accept=".txt,text/plain" onChange={(e) => setFile(e.target.files?.[0] ?? null)} />
      <Button type="submit" disabled={!file || !name || upload.isPending}>Upload grid</Button>
      <p className="w-full text-xs text-ink-500">Plain text: <code># comment</code> lines, then one row per node <code>latitude longitude height</code> (degrees, degrees, metres) on a complete regular grid. See docs/formats/quasigeoid-grid.md.</p>
      {upload.isError && <div className="w-full"><FormError text={describeError(upload.error)} /></div>}
      {upload.isSuccess && <p className="w-full text-sm text-agree-800">Grid “{upload.data.name}” stored: {upload.data.nodeCount} nodes.</p>}
    </form>
  );
}
