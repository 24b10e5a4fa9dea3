import { zodResolver } from '@hookform/resolvers/zod';
import { createColumnHelper } from '@tanstack/react-table';
import { useState } from 'react';
import { useForm, type Resolver } from 'react-hook-form';
import { Link, useNavigate } from 'react-router';
import { z } from 'zod';
import { createSiteSchema, type CreateSite, type Site } from '../../../shared/registry';
import { useInstitutes, useMe } from '../../api/account';
import { useCreateSite, useCrsList, useGrids, useSites } from '../../api/registry';
import { DataTable, type TableState } from '../../components/data-table';
import { Button, Field, inputClass, Panel } from '../../components/ui';
import { applyServerErrors, fixed, FormError, selectClass } from './registry-ui';

const col = createColumnHelper<Site>();
const columns = [
  col.accessor('name', { header: 'Site', cell: (c) => <Link to={`/sites/${c.row.original.id}`}>{c.getValue()}</Link> }),
  col.accessor((s) => s.institute.code, { id: 'institute', header: 'Institute' }),
  col.accessor((s) => s.grs80.latitudeDeg, { id: 'latitudeDeg', header: 'Latitude (°)', cell: (c) => fixed(c.getValue(), 6) }),
  col.accessor((s) => s.grs80.longitudeDeg, { id: 'longitudeDeg', header: 'Longitude (°)', cell: (c) => fixed(c.getValue(), 6) }),
  col.accessor((s) => s.grs80.ellipsoidalHeightM, { id: 'ellipsoidalHeightM', header: 'h (m)', cell: (c) => fixed(c.getValue(), 3) }),
  col.accessor((s) => s.normalHeight.valueM, { id: 'normalHeight', header: 'H = h − ζ ± standard uncertainty, k = 1 (m)', enableSorting: false, cell: (c) => `${fixed(c.getValue(), 3)} ± ${fixed(c.row.original.normalHeight.uncertaintyM, 3)}` }),
  col.accessor((s) => s.entered.crs, { id: 'crs', header: 'Entered in', enableSorting: false }),
];

export function SitesPage() {
  const me = useMe();
  const [state, setState] = useState<TableState>({ page: 1, pageSize: 20, sort: 'name', order: 'asc', q: '' });
  const sites = useSites(state);
  const [adding, setAdding] = useState(false);
  const canWrite = me.data?.role === 'operator' || me.data?.role === 'coordinator';
  return (
    <>
      <header className="flex items-end justify-between">
        <div>
          <h1>Sites</h1>
          <p className="text-sm text-ink-500">Reference points whose potential a clock comparison measures. <Link to="/reference-data">Quasigeoid grids and reference frequencies</Link></p>
        </div>
        {canWrite && !adding && <Button onClick={() => setAdding(true)}>New site</Button>}
      </header>
      {adding && <NewSiteForm onDone={() => setAdding(false)} />}
      <Panel>
        <DataTable columns={columns as never} rows={sites.data?.items ?? []} total={sites.data?.total ?? 0} state={state} onState={setState} loading={sites.isFetching} filterLabel="Filter by name, reference point or institute" />
      </Panel>
    </>
  );
}

// The shared schema decides; this only turns the flat form into its shape (empty height, empty tie → none).
const siteFormSchema = z.preprocess((raw) => {
  const v = raw as Record<string, unknown> & { coordinates: unknown[]; benchmarkTie: { benchmarkCode?: string } | null; quasigeoid: Record<string, unknown> };
  const coordinates = (v.coordinates ?? []).filter((c) => c !== undefined && c !== '' && !(typeof c === 'number' && Number.isNaN(c)));
  const benchmarkTie = v.benchmarkTie && v.benchmarkTie.benchmarkCode ? v.benchmarkTie : null;
  const quasigeoid = v.quasigeoid?.source === 'grid' ? { source: 'grid', gridId: v.quasigeoid.gridId } : { source: 'entered', heightM: v.quasigeoid?.heightM, uncertaintyM: v.quasigeoid?.uncertaintyM };
  return { ...v, coordinates, benchmarkTie, quasigeoid, instituteId: v.instituteId || undefined };
}, createSiteSchema);

type SiteForm = {
  name: string; instituteId?: string; referencePoint: string; crs: string; coordinates: (number | undefined)[]; ellipsoidalHeightUncertaintyM: number;
  quasigeoid: { source: 'entered' | 'grid'; heightM?: number; uncertaintyM?: number; gridId?: string };
  benchmarkTie: { benchmarkCode?: string; heightDifferenceM?: number; uncertaintyM?: number } | null;
};

const axisLabels: Record<string, [string, string, string]> = {
  projected: ['Easting E (m)', 'Northing N (m)', 'Ellipsoidal height h (m)'],
  geocentric: ['X (m)', 'Y (m)', 'Z (m)'],
  geographic2D: ['Longitude (°)', 'Latitude (°)', 'Ellipsoidal height h (m), optional'],
  geographic3D: ['Longitude (°)', 'Latitude (°)', 'Ellipsoidal height h (m)'],
};
const num = { setValueAs: (v: string) => (v === '' || v === undefined ? undefined : Number(v)) };

function NewSiteForm({ onDone }: { onDone: () => void }) {
  const me = useMe();
  const crs = useCrsList();
  const grids = useGrids();
  const institutes = useInstitutes();
  const create = useCreateSite();
  const navigate = useNavigate();
  const [formError, setFormError] = useState<string | null>(null);
  const { register, handleSubmit, watch, setError, formState: { errors } } = useForm<SiteForm, unknown, CreateSite>({
    resolver: zodResolver(siteFormSchema as never) as unknown as Resolver<SiteForm, unknown, CreateSite>,
    defaultValues: { crs: 'EPSG:25832', coordinates: [], ellipsoidalHeightUncertaintyM: 0.01, quasigeoid: { source: 'entered' }, benchmarkTie: {} },
  });
  const crsCode = watch('crs');
  const zetaSource = watch('quasigeoid.source');
  const kind = crs.data?.find((c) => c.code === crsCode)?.kind ?? (crsCode?.includes('+proj=longlat') ? 'geographic3D' : crsCode?.includes('+proj=geocent') ? 'geocentric' : 'projected');
  const labels = axisLabels[kind];
  const isCoordinator = me.data?.role === 'coordinator';
  const e = errors as Record<string, { message?: string } & Record<string, { message?: string }>>;
  return (
    <Panel title="New site">
      <form className="space-y-4" onSubmit={handleSubmit((body) => {
        setFormError(null);
        create.mutate(body, {
          onSuccess: (s) => { onDone(); navigate(`/sites/${s.id}`); },
          onError: (err) => setFormError(applyServerErrors(err, setError, ['name', 'instituteId', 'referencePoint', 'crs', 'coordinates', 'ellipsoidalHeightUncertaintyM', 'quasigeoid', 'benchmarkTie'])),
        });
      })}>
        <div className="grid gap-3 md:grid-cols-3">
          <Field label="Site name" error={e.name?.message}><input className={inputClass} {...register('name')} /></Field>
          {isCoordinator && (
            <Field label="Institute" error={e.instituteId?.message}>
              <select className={selectClass} {...register('instituteId')}>
                <option value="">choose…</option>
                {institutes.data?.map((i) => <option key={i.id} value={i.id}>{i.code} · {i.name}</option>)}
              </select>
            </Field>
          )}
          <div className="md:col-span-2"><Field label="Reference point (the point whose potential is meant)" error={e.referencePoint?.message}><input className={inputClass} {...register('referencePoint')} /></Field></div>
        </div>
        <fieldset className="grid gap-3 md:grid-cols-4">
          <legend className="mb-1 text-sm font-semibold text-ink-700">Coordinates as you have them</legend>
          <Field label="Coordinate reference system" error={e.crs?.message} hint="EPSG code from the list, or a PROJ string (+proj=…)">
            <input className={inputClass} list="crs-list" {...register('crs')} />
            <datalist id="crs-list">{crs.data?.map((c) => <option key={c.code} value={c.code}>{c.label}</option>)}</datalist>
          </Field>
          {labels.map((label, i) => (
            <Field key={i} label={label} error={(e.coordinates as unknown as Record<number, { message?: string }> | undefined)?.[i]?.message ?? (i === 0 ? e.coordinates?.message : undefined)}>
              <input className={inputClass} inputMode="decimal" {...register(`coordinates.${i}` as const, num)} />
            </Field>
          ))}
          <Field label="u(h), standard uncertainty (m)" error={e.ellipsoidalHeightUncertaintyM?.message}><input className={inputClass} {...register('ellipsoidalHeightUncertaintyM', num)} /></Field>
        </fieldset>
        <fieldset className="grid gap-3 md:grid-cols-4">
          <legend className="mb-1 text-sm font-semibold text-ink-700">Quasigeoid height ζ</legend>
          <Field label="Source">
            <select className={selectClass} {...register('quasigeoid.source')}>
              <option value="entered">I enter ζ</option>
              <option value="grid">Interpolate from a grid</option>
            </select>
          </Field>
          {zetaSource === 'grid' ? (
            <Field label="Grid" error={e.quasigeoid?.gridId?.message ?? e.quasigeoid?.message}>
              <select className={selectClass} {...register('quasigeoid.gridId')}>
                <option value="">choose…</option>
                {grids.data?.map((g) => <option key={g.id} value={g.id}>{g.name} (u {g.uncertaintyM} m, k = 1)</option>)}
              </select>
            </Field>
          ) : (
            <>
              <Field label="ζ (m)" error={e.quasigeoid?.heightM?.message}><input className={inputClass} {...register('quasigeoid.heightM', num)} /></Field>
              <Field label="u(ζ) (m)" error={e.quasigeoid?.uncertaintyM?.message}><input className={inputClass} {...register('quasigeoid.uncertaintyM', num)} /></Field>
            </>
          )}
        </fieldset>
        <fieldset className="grid gap-3 md:grid-cols-4">
          <legend className="mb-1 text-sm font-semibold text-ink-700">Local tie to a levelling benchmark (optional)</legend>
          <Field label="Benchmark code" error={e.benchmarkTie?.benchmarkCode?.message}><input className={inputClass} {...register('benchmarkTie.benchmarkCode')} /></Field>
          <Field label="Height difference site − benchmark (m)" error={e.benchmarkTie?.heightDifferenceM?.message}><input className={inputClass} {...register('benchmarkTie.heightDifferenceM', num)} /></Field>
          <Field label="u (m)" error={e.benchmarkTie?.uncertaintyM?.message}><input className={inputClass} {...register('benchmarkTie.uncertaintyM', num)} /></Field>
        </fieldset>
        <FormError text={formError} />
        <div className="flex gap-2">
          <Button type="submit" disabled={create.isPending}>Save site</Button>
          <Button type="button" variant="quiet" onClick={onDone}>Cancel</Button>
        </div>
      </form>
    </Panel>
  );
}
