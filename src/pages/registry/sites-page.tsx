import { zodResolver } from '@hookform/resolvers/zod';
import { createColumnHelper } from '@tanstack/react-table';
import { useState } from 'react';
import { useForm, type Resolver } from 'react-hook-form';
import { Link, useNavigate } from 'react-router';
import { createSiteSchema, type CreateSite, type Site } from '../../../shared/registry';
import { useInstitutes, useMe } from '../../api/account';
import { useCreateSite, useSites } from '../../api/registry';
import { DataTable, type TableState } from '../../components/data-table';
import { Button, Field, Panel } from '../../components/ui';
import { siteFieldNames, SiteFields, siteFormSchema, type SiteForm } from './registry-forms';
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

const newSiteSchema = siteFormSchema(createSiteSchema);

function NewSiteForm({ onDone }: { onDone: () => void }) {
  const me = useMe();
  const institutes = useInstitutes();
  const create = useCreateSite();
  const navigate = useNavigate();
  const [formError, setFormError] = useState<string | null>(null);
  const { register, handleSubmit, watch, setError, formState: { errors } } = useForm<SiteForm, unknown, CreateSite>({
    resolver: zodResolver(newSiteSchema as never) as unknown as Resolver<SiteForm, unknown, CreateSite>,
    defaultValues: { crs: 'EPSG:25832', coordinates: [], ellipsoidalHeightUncertaintyM: 0.01, quasigeoid: { source: 'entered' }, benchmarkTie: {} },
  });
  const isCoordinator = me.data?.role === 'coordinator';
  return (
    <Panel title="New site">
      <form className="space-y-4" onSubmit={handleSubmit((body) => {
        setFormError(null);
        create.mutate(body, {
          onSuccess: (s) => { onDone(); navigate(`/sites/${s.id}`); },
          onError: (err) => setFormError(applyServerErrors(err, setError, siteFieldNames)),
        });
      })}>
        <SiteFields register={register} watch={watch} errors={errors} instituteField={isCoordinator ? (
          <Field label="Institute" error={errors.instituteId?.message}>
            <select className={selectClass} {...register('instituteId')}>
              <option value="">choose…</option>
              {institutes.data?.map((i) => <option key={i.id} value={i.id}>{i.code} · {i.name}</option>)}
            </select>
          </Field>
        ) : undefined} />
        <FormError text={formError} />
        <div className="flex gap-2">
          <Button type="submit" disabled={create.isPending}>Save site</Button>
          <Button type="button" variant="quiet" onClick={onDone}>Cancel</Button>
        </div>
      </form>
    </Panel>
  );
}
