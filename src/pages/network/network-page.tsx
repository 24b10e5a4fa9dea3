import { zodResolver } from '@hookform/resolvers/zod';
import { createColumnHelper } from '@tanstack/react-table';
import { useState } from 'react';
import { useForm } from 'react-hook-form';
import { Link } from 'react-router';
import { useMe } from '../../api/account';
import { useBenchmarks, useCreateDatum, useDatums, useSaveBenchmark } from '../../api/network';
import { DataTable, type TableState } from '../../components/data-table';
import { Button, Field, inputClass, Panel } from '../../components/ui';
import { ApiError, describeError } from '../../lib/api-client';
import { notify } from '../../lib/notices';
import { benchmarkInputSchema, heightDatumInputSchema, tideSystems, type Benchmark, type HeightDatumInput } from '../../../shared/network';
import { z } from 'zod';
import { fmt } from './format';
import { NetworkNav } from './network-nav';

const col = createColumnHelper<Benchmark>();
const columns = [
  col.accessor('code', { header: 'Code', cell: (c) => <Link to={`/network/benchmarks/${c.row.original.id}`}>{c.getValue()}</Link> }),
  col.accessor('name', { header: 'Name' }),
  col.accessor('datumName', { header: 'Datum' }),
  col.accessor('latitudeDeg', { header: 'Latitude (GRS80)', cell: (c) => `${fmt(c.getValue(), 5)}°` }),
  col.accessor('longitudeDeg', { header: 'Longitude (GRS80)', cell: (c) => `${fmt(c.getValue(), 5)}°` }),
  col.accessor('knownNormalHeightM', {
    header: 'Known height H ± u (m, k = 1)',
    cell: (c) => (c.getValue() === null ? '—' : `${fmt(c.getValue(), 4)} ± ${fmt(c.row.original.knownUncertaintyM ?? 0, 4)} m`),
  }),
  col.accessor('fixed', { header: 'Datum role', cell: (c) => (c.getValue() ? <span className="font-semibold text-ink-800">■ fixed</span> : 'free') }),
  col.accessor('state', { header: 'State', cell: (c) => (c.getValue() === 'destroyed' ? <span className="text-disagree-600">✕ destroyed</span> : 'in use') }),
];

export function NetworkPage() {
  const me = useMe();
  const canWrite = me.data?.role === 'coordinator';
  const datums = useDatums();
  const [state, setState] = useState<TableState>({ page: 1, pageSize: 15, sort: 'code', order: 'asc', q: '' });
  const benchmarks = useBenchmarks(state);
  return (
    <>
      <h1>Levelling network</h1>
      <NetworkNav />
      <Panel title="Height datums">
        <div className="grid gap-3 md:grid-cols-2">
          {datums.data?.map((d) => (
            <div key={d.id} className="rounded-md border border-paper-200 p-3 text-sm">
              <p className="font-semibold">{d.name}</p>
              <p className="text-ink-600">{d.tideSystem} · realised {d.realisationEpoch ?? '—'} · {d.benchmarkCount} benchmarks</p>
              <p className="text-ink-600">loop tolerance coefficient t = {d.loopToleranceMmPerSqrtKm} mm/√km · forward/backward t = {d.sectionToleranceMmPerSqrtKm} mm/√km (tolerance t·√L, L in km)</p>
              {d.notes && <p className="mt-1 text-xs text-ink-500">{d.notes}</p>}
            </div>
          ))}
        </div>
        {canWrite && <DatumForm />}
      </Panel>
      <Panel title="Benchmarks">
        <DataTable columns={columns as never} rows={benchmarks.data?.items ?? []} total={benchmarks.data?.total ?? 0} state={state} onState={setState}
          loading={benchmarks.isFetching} filterLabel="Filter by code, name or datum" />
        {canWrite && <BenchmarkForm />}
      </Panel>
    </>
  );
}

function DatumForm() {
  const create = useCreateDatum();
  const { register, handleSubmit, reset, formState: { errors } } = useForm<z.input<typeof heightDatumInputSchema>, unknown, HeightDatumInput>({
    resolver: zodResolver(heightDatumInputSchema), defaultValues: { tideSystem: 'zero-tide', loopToleranceMmPerSqrtKm: 4, sectionToleranceMmPerSqrtKm: 4 },
  });
  return (
    <details className="mt-4">
      <summary className="cursor-pointer text-sm font-medium">Define a height datum</summary>
      <form className="mt-3 grid gap-3 md:grid-cols-3" onSubmit={handleSubmit((v) => create.mutate(v, { onSuccess: () => { reset(); notify({ kind: 'info', text: 'Height datum saved.' }); }, onError: (e) => notify({ kind: 'error', text: describeError(e) }) }))}>
        <Field label="Name" error={errors.name?.message}><input className={inputClass} {...register('name')} /></Field>
        <Field label="Tide system" error={errors.tideSystem?.message}>
          <select className={inputClass} {...register('tideSystem')}>{tideSystems.map((t) => <option key={t}>{t}</option>)}</select>
        </Field>
        <Field label="Realisation epoch" error={errors.realisationEpoch?.message}><input className={inputClass} placeholder="e.g. 2004.0" {...register('realisationEpoch')} /></Field>
        <Field label="Loop tolerance coefficient t (mm/√km)" hint="tolerance t·√L; 4: FGCC 1984 first-order (from memory)" error={errors.loopToleranceMmPerSqrtKm?.message}>
          <input className={inputClass} type="number" step="any" {...register('loopToleranceMmPerSqrtKm', { valueAsNumber: true })} />
        </Field>
        <Field label="Forward/backward tolerance (mm/√km)" error={errors.sectionToleranceMmPerSqrtKm?.message}>
          <input className={inputClass} type="number" step="any" {...register('sectionToleranceMmPerSqrtKm', { valueAsNumber: true })} />
        </Field>
        <Field label="Notes" error={errors.notes?.message}><input className={inputClass} {...register('notes')} /></Field>
        <div><Button type="submit" disabled={create.isPending}>Save datum</Button></div>
      </form>
    </details>
  );
}

export type BenchmarkFormValues = { code: string; name: string; datumId: string; crs: string; coordinates: string; knownKind: '' | 'C' | 'H'; knownValue: string; knownUncertainty: string; knownTideSystem?: '' | (typeof tideSystems)[number]; fixed: boolean; monumentation: string; state: 'in-use' | 'destroyed' };

/** Coordinates are typed as one comma-separated line; the shared schema then checks the whole benchmark. */
function candidate(f: BenchmarkFormValues) {
  return {
    code: f.code, name: f.name, datumId: f.datumId, crs: f.crs, coordinates: f.coordinates.split(/[,\s]+/).filter(Boolean).map(Number),
    known: f.knownKind ? { kind: f.knownKind, value: Number(f.knownValue), uncertainty: Number(f.knownUncertainty || 0), tideSystem: f.knownTideSystem ? f.knownTideSystem : null } : null,
    fixed: f.fixed, monumentation: f.monumentation || null, state: f.state,
  };
}

export function BenchmarkForm({ initial, id }: { initial?: Partial<BenchmarkFormValues>; id?: string }) {
  const datums = useDatums();
  const save = useSaveBenchmark();
  const [fieldErrors, setFieldErrors] = useState<Record<string, string>>({});
  const { register, handleSubmit } = useForm<BenchmarkFormValues>({ defaultValues: { crs: 'EPSG:4937', knownKind: '', fixed: false, state: 'in-use', ...initial } });
  const submit = (f: BenchmarkFormValues) => {
    const parsed = benchmarkInputSchema.safeParse(candidate(f));
    if (!parsed.success) {
      setFieldErrors(Object.fromEntries(parsed.error.issues.map((i) => [String(i.path[0]), i.message])));
      return;
    }
    setFieldErrors({});
    save.mutate({ id, body: parsed.data }, {
      onSuccess: () => notify({ kind: 'info', text: `Benchmark ${parsed.data.code} saved.` }),
      onError: (e) => {
        if (e instanceof ApiError) setFieldErrors(Object.fromEntries((e.problem.issues ?? []).map((i) => [i.path.replace(/^body\./, '').split('.')[0], i.message])));
        notify({ kind: 'error', text: describeError(e) });
      },
    });
  };
  return (
    <details className="mt-4" open={!!id}>
      <summary className="cursor-pointer text-sm font-medium">{id ? 'Change this benchmark' : 'Register a benchmark'}</summary>
      <form className="mt-3 grid gap-3 md:grid-cols-3" onSubmit={handleSubmit(submit)}>
        <Field label="Code" error={fieldErrors.code}><input className={inputClass} {...register('code')} /></Field>
        <Field label="Name" error={fieldErrors.name}><input className={inputClass} {...register('name')} /></Field>
        <Field label="Datum" error={fieldErrors.datumId}>
          <select className={inputClass} {...register('datumId')}>{datums.data?.map((d) => <option key={d.id} value={d.id}>{d.name}</option>)}</select>
        </Field>
        <Field label="Coordinate reference system" hint="EPSG code (e.g. EPSG:4937, EPSG:25832) or a PROJ string" error={fieldErrors.crs}><input className={inputClass} {...register('crs')} /></Field>
        <Field label="Coordinates" hint="in the CRS's order: lon, lat[, h] or E, N" error={fieldErrors.coordinates}><input className={inputClass} {...register('coordinates')} /></Field>
        <Field label="Known height given as" error={fieldErrors.known}>
          <select className={inputClass} {...register('knownKind')}>
            <option value="">not known</option><option value="C">geopotential number C (m²/s²)</option><option value="H">normal height H (m)</option>
          </select>
        </Field>
        <Field label="Known value"><input className={inputClass} {...register('knownValue')} /></Field>
        <Field label="Standard uncertainty (same unit)"><input className={inputClass} {...register('knownUncertainty')} /></Field>
        <Field label="Tide system of the known value">
          <select className={inputClass} {...register('knownTideSystem')} data-testid="known-tide-system">
            <option value="">not stated (a run will ask for it)</option>{tideSystems.map((t) => <option key={t}>{t}</option>)}
          </select>
        </Field>
        <Field label="Monumentation"><input className={inputClass} {...register('monumentation')} /></Field>
        <label className="flex items-center gap-2 text-sm"><input type="checkbox" {...register('fixed')} /> fixed (datum point)</label>
        <Field label="State"><select className={inputClass} {...register('state')}><option value="in-use">in use</option><option value="destroyed">destroyed</option></select></Field>
        <div><Button type="submit" disabled={save.isPending}>Save benchmark</Button></div>
      </form>
    </details>
  );
}
