import { zodResolver } from '@hookform/resolvers/zod';
import { createColumnHelper } from '@tanstack/react-table';
import { useState } from 'react';
import { useForm, type UseFormRegister } from 'react-hook-form';
import { Link, useNavigate, useParams } from 'react-router';
import { createLinkSchema, type CreateLink, type Link as FibreLink } from '../../../shared/registry';
import { useMe } from '../../api/account';
import { useCreateLink, useLink, useSites } from '../../api/registry';
import { DataTable, type TableState } from '../../components/data-table';
import { Button, EmptyState, Field, Panel } from '../../components/ui';
import { describeError } from '../../lib/api-client';
import { useLinks } from '../../api/registry';
import { canChangeLink, EditLinkPanel, linkFieldNames, LinkFields, type LinkFieldValues } from './registry-forms';
import { applyServerErrors, Facts, fixed, FormError, sci, selectClass } from './registry-ui';

const col = createColumnHelper<FibreLink>();
const columns = [
  col.accessor('name', { header: 'Link', cell: (c) => <Link to={`/links/${c.row.original.id}`}>{c.getValue()}</Link> }),
  col.accessor((l) => `${l.siteA.name} (${l.siteA.instituteCode}) – ${l.siteB.name} (${l.siteB.instituteCode})`, { id: 'ends', header: 'Sites', enableSorting: false }),
  col.accessor('fibreLengthKm', { header: 'Fibre (km)', cell: (c) => fixed(c.getValue(), 3) }),
  col.accessor('geodesicDistanceKm', { header: 'Geodesic (km)', enableSorting: false, cell: (c) => fixed(c.getValue(), 3) }),
  col.accessor('chordDistanceKm', { header: 'Chord (km)', enableSorting: false, cell: (c) => fixed(c.getValue(), 3) }),
  col.accessor('fractionalUncertainty', { header: 'Link u, fractional (k = 1)', cell: (c) => sci(c.getValue()) }),
];

export function LinksPage() {
  const me = useMe();
  const [state, setState] = useState<TableState>({ page: 1, pageSize: 20, sort: 'name', order: 'asc', q: '' });
  const links = useLinks(state);
  const [adding, setAdding] = useState(false);
  const canWrite = me.data?.role === 'operator' || me.data?.role === 'coordinator';
  return (
    <>
      <header className="flex items-end justify-between">
        <div>
          <h1>Fibre links</h1>
          <p className="text-sm text-ink-500">Geodesic (GRS80) and straight-line chord distances are computed from the sites, next to the fibre length you enter.</p>
        </div>
        {canWrite && !adding && <Button onClick={() => setAdding(true)}>New link</Button>}
      </header>
      {adding && <NewLinkForm onDone={() => setAdding(false)} />}
      <Panel>
        <DataTable columns={columns as never} rows={links.data?.items ?? []} total={links.data?.total ?? 0} state={state} onState={setState} loading={links.isFetching} filterLabel="Filter by link or site" />
      </Panel>
    </>
  );
}

function NewLinkForm({ onDone }: { onDone: () => void }) {
  const sites = useSites({ page: 1, pageSize: 200, order: 'asc', sort: 'name', q: '' });
  const create = useCreateLink();
  const navigate = useNavigate();
  const [formError, setFormError] = useState<string | null>(null);
  const { register, handleSubmit, setError, formState: { errors } } = useForm<CreateLink>({ resolver: zodResolver(createLinkSchema) as never, defaultValues: { notes: '' } });
  const options = sites.data?.items.map((s) => <option key={s.id} value={s.id}>{s.name} ({s.institute.code})</option>);
  return (
    <Panel title="New fibre link">
      <form className="grid gap-3 md:grid-cols-3" onSubmit={handleSubmit((body) => {
        setFormError(null);
        create.mutate(body, {
          onSuccess: (l) => { onDone(); navigate(`/links/${l.id}`); },
          onError: (e) => setFormError(applyServerErrors(e, setError, ['siteAId', 'siteBId', ...linkFieldNames])),
        });
      })}>
        <LinkFields register={register as unknown as UseFormRegister<LinkFieldValues>} errors={errors} siteFields={(
          <>
            <Field label="Site A" error={errors.siteAId?.message}><select className={selectClass} {...register('siteAId')}><option value="">choose…</option>{options}</select></Field>
            <Field label="Site B" error={errors.siteBId?.message}><select className={selectClass} {...register('siteBId')}><option value="">choose…</option>{options}</select></Field>
          </>
        )} />
        <div className="md:col-span-3"><FormError text={formError} /></div>
        <div className="flex gap-2 md:col-span-3">
          <Button type="submit" disabled={create.isPending}>Save link</Button>
          <Button type="button" variant="quiet" onClick={onDone}>Cancel</Button>
        </div>
      </form>
    </Panel>
  );
}

export function LinkPage() {
  const { id = '' } = useParams();
  const me = useMe();
  const link = useLink(id);
  if (link.isPending) return <p className="text-ink-500">Loading…</p>;
  if (link.isError) return <EmptyState title="This link could not be loaded">{describeError(link.error)}</EmptyState>;
  const l = link.data;
  const ratio = l.fibreLengthKm / l.geodesicDistanceKm;
  return (
    <>
      <header>
        <p className="text-sm text-ink-500"><Link to="/links">Fibre links</Link></p>
        <h1 data-testid="link-title">{l.name}</h1>
      </header>
      <Panel title="Link">
        <Facts items={[
          ['Site A', <Link key="a" to={`/sites/${l.siteA.id}`}>{l.siteA.name} ({l.siteA.instituteCode})</Link>],
          ['Site B', <Link key="b" to={`/sites/${l.siteB.id}`}>{l.siteB.name} ({l.siteB.instituteCode})</Link>],
          ['Fibre length', `${fixed(l.fibreLengthKm, 3)} km`],
          ['Geodesic distance (GRS80)', <span key="g" data-testid="geodesic-km">{fixed(l.geodesicDistanceKm, 3)} km</span>],
          ['Chord distance', `${fixed(l.chordDistanceKm, 3)} km`],
          ['Fibre / geodesic', Number.isFinite(ratio) ? ratio.toFixed(2) : '—'],
          ['Link fractional uncertainty', `${sci(l.fractionalUncertainty)} (k = 1)`],
          ['Notes', l.notes || '—'],
        ]} />
      </Panel>
      {canChangeLink(me.data, l) && <EditLinkPanel link={l} />}
    </>
  );
}
