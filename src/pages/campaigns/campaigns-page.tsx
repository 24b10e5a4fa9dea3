import { zodResolver } from '@hookform/resolvers/zod';
import { createColumnHelper } from '@tanstack/react-table';
import { useState } from 'react';
import { useForm } from 'react-hook-form';
import { Link, useNavigate } from 'react-router';
import { z } from 'zod';
import { campaignRoleLabels, campaignRoles, campaignStateLabels, campaignStates, createCampaignSchema, type CampaignState, type CampaignSummary, type CreateCampaign } from '../../../shared/campaigns';
import { useMe } from '../../api/account';
import { useCampaigns, useCreateCampaign, useDefaultRatio, type CampaignListParams } from '../../api/campaigns';
import { useClocks, useLinks } from '../../api/registry';
import { DataTable, type TableState } from '../../components/data-table';
import { Button, Field, inputClass, Panel } from '../../components/ui';
import { describeError } from '../../lib/api-client';
import { applyServerErrors, FormError, sci, selectClass } from '../registry/registry-ui';
import { CampaignStateBadge } from './campaign-state';
import { typeset } from '../../components/typeset';

const col = createColumnHelper<CampaignSummary>();
const columns = [
  col.accessor('name', { header: 'Campaign', cell: (c) => <Link to={`/campaigns/${c.row.original.id}`}>{c.getValue()}</Link> }),
  col.accessor('state', { header: 'State', cell: (c) => <CampaignStateBadge state={c.getValue()} /> }),
  col.accessor((c) => c.institute.code, { id: 'institute', header: 'Owner' }),
  col.accessor((c) => `${c.clockA.name} → ${c.clockB.name}`, { id: 'clocks', header: 'Clock A → clock B', enableSorting: false }),
  col.accessor((c) => c.link.name, { id: 'link', header: 'Link', enableSorting: false }),
  col.accessor('periodStart', { header: 'From', cell: (c) => c.getValue().slice(0, 10) }),
  col.accessor('periodEnd', { header: 'To', cell: (c) => c.getValue().slice(0, 10) }),
];

export function CampaignsPage() {
  const me = useMe();
  const [state, setState] = useState<TableState>({ page: 1, pageSize: 20, sort: 'updatedAt', order: 'desc', q: '' });
  const [stateFilter, setStateFilter] = useState<CampaignState | ''>('');
  const params: CampaignListParams = { ...state, state: stateFilter || undefined };
  const campaigns = useCampaigns(params);
  const [adding, setAdding] = useState(false);
  const canCreate = me.data?.role === 'operator';
  return (
    <>
      <header className="flex items-end justify-between">
        <div>
          <h1>Campaigns</h1>
          <p className="text-sm text-ink-500">Two clocks compared over one fibre link during a period. Lab staff prepare and submit; the coordinating institute reviews.</p>
        </div>
        {canCreate && !adding && <Button onClick={() => setAdding(true)}>New campaign</Button>}
      </header>
      {adding && <NewCampaignForm onDone={() => setAdding(false)} />}
      <Panel>
        <div className="mb-2 flex items-center gap-2 text-sm">
          <label htmlFor="state-filter" className="text-ink-600">State</label>
          <select id="state-filter" className={`${selectClass} max-w-48`} value={stateFilter} onChange={(e) => { setStateFilter(e.target.value as CampaignState | ''); setState({ ...state, page: 1 }); }}>
            <option value="">all</option>
            {campaignStates.map((s) => <option key={s} value={s}>{campaignStateLabels[s]}</option>)}
          </select>
        </div>
        <DataTable columns={columns as never} rows={campaigns.data?.items ?? []} total={campaigns.data?.total ?? 0} state={state} onState={setState} loading={campaigns.isFetching} filterLabel="Filter by name, clock or institute" />
      </Panel>
    </>
  );
}

// The shared schema validates; the form only keeps the optional override flat (empty → default ratio).
type CampaignForm = Omit<CreateCampaign, 'referenceRatio' | 'localTie'> & {
  override: boolean; ratioValue?: string; ratioU?: number; justification?: string;
  tieKind?: 'same-site' | 'entered' | 'benchmarks'; tieDeltaC?: number; tieU?: number; tieSource?: string; tieGravity?: number;
};
const localTieOf = (v: CampaignForm) => {
  if (v.role !== 'side-by-side') return null;
  if (v.tieKind === 'entered') return { kind: 'entered', deltaC_m2s2: v.tieDeltaC, uncertainty_m2s2: v.tieU, source: v.tieSource ?? '' };
  if (v.tieKind === 'benchmarks') return { kind: 'benchmarks', gravity_m_s2: v.tieGravity ?? 9.81 };
  return { kind: 'same-site' };
};
const campaignFormSchema = z.preprocess((raw) => {
  const v = raw as CampaignForm;
  const toIso = (d: string) => (d && !d.endsWith('Z') && d.length === 16 ? `${d}:00Z` : d);
  return {
    name: v.name, clockAId: v.clockAId, clockBId: v.clockBId, linkId: v.linkId, periodStart: toIso(v.periodStart), periodEnd: toIso(v.periodEnd), operatorNotes: v.operatorNotes,
    referenceRatio: v.override ? { value: v.ratioValue ?? '', relativeUncertainty: v.ratioU, justification: v.justification ?? '' } : null,
    role: v.role ?? 'remote',
    localTie: localTieOf(v),
  };
}, createCampaignSchema);
const formFieldOf = (path: string) => path.replace(/^referenceRatio\.value/, 'ratioValue').replace(/^referenceRatio\.relativeUncertainty/, 'ratioU').replace(/^referenceRatio\.justification/, 'justification')
  .replace(/^localTie\.deltaC_m2s2/, 'tieDeltaC').replace(/^localTie\.uncertainty_m2s2/, 'tieU').replace(/^localTie\.source/, 'tieSource').replace(/^localTie\.gravity_m_s2/, 'tieGravity').replace(/^localTie(\.kind)?$/, 'tieKind');

function NewCampaignForm({ onDone }: { onDone: () => void }) {
  const me = useMe();
  const own = useClocks({ page: 1, pageSize: 200, order: 'asc', sort: 'name', q: '', instituteId: me.data?.institute?.id });
  const all = useClocks({ page: 1, pageSize: 200, order: 'asc', sort: 'name', q: '' });
  const links = useLinks({ page: 1, pageSize: 200, order: 'asc', sort: 'name', q: '' });
  const create = useCreateCampaign();
  const navigate = useNavigate();
  const [formError, setFormError] = useState<string | null>(null);
  const { register, handleSubmit, watch, setError, formState: { errors } } = useForm<CampaignForm>({
    resolver: (async (values, ctx, opts) => {
      const r = await (zodResolver(campaignFormSchema as never) as unknown as (v: unknown, c: unknown, o: unknown) => Promise<{ values: unknown; errors: unknown }>)(values, ctx, opts);
      const errs = Object.fromEntries(Object.entries(r.errors as Record<string, unknown>).flatMap(([k, v]) =>
        k === 'localTie' ? Object.entries(v as Record<string, unknown>).map(([kk, vv]) => [formFieldOf(`localTie.${kk}`), vv]) : k === 'referenceRatio' ? Object.entries(v as Record<string, unknown>).map(([kk, vv]) => [formFieldOf(`referenceRatio.${kk}`), vv]) : [[k, v]]));
      return { values: r.values, errors: errs } as never;
    }),
    defaultValues: { override: false, operatorNotes: '', role: 'remote', tieKind: 'same-site', tieGravity: 9.81 },
  });
  const [clockAId, clockBId, linkId, override, role, tieKind] = watch(['clockAId', 'clockBId', 'linkId', 'override', 'role', 'tieKind']);
  const ratio = useDefaultRatio(clockAId ?? '', clockBId ?? '');
  const clockA = all.data?.items.find((c) => c.id === clockAId);
  const clockB = all.data?.items.find((c) => c.id === clockBId);
  // A transportable clock's site comes from its deployment in the period (checked by the server): every link is offered.
  const joining = links.data?.items.filter((l) => !clockA || !clockB || clockA.mobility === 'transportable' || clockB.mobility === 'transportable' || [l.siteA.id, l.siteB.id].includes(clockA.site.id) && [l.siteA.id, l.siteB.id].includes(clockB.site.id));
  return (
    <Panel title="New campaign">
      <form className="space-y-4" onSubmit={handleSubmit((body) => {
        setFormError(null);
        create.mutate(body as unknown as CreateCampaign, {
          onSuccess: (c) => { onDone(); navigate(`/campaigns/${c.id}`); },
          onError: (e) => {
            const wrap = (path: string, opt: { message: string }) => setError(formFieldOf(path) as never, opt);
            setFormError(applyServerErrors(e, wrap as never, ['name', 'clockAId', 'clockBId', 'linkId', 'periodStart', 'periodEnd', 'operatorNotes', 'referenceRatio', 'role', 'tieKind', 'tieDeltaC', 'tieU', 'tieSource', 'tieGravity']));
          },
        });
      })}>
        <div className="grid gap-3 md:grid-cols-3">
          <Field label="Campaign name" error={errors.name?.message}><input className={inputClass} {...register('name')} /></Field>
          <Field label="Clock A (your institute; owns the campaign)" error={errors.clockAId?.message}>
            <select className={selectClass} {...register('clockAId')}><option value="">choose…</option>{own.data?.items.map((c) => <option key={c.id} value={c.id}>{c.name} · {c.speciesLabel}</option>)}</select>
          </Field>
          <Field label="Clock B" error={errors.clockBId?.message}>
            <select className={selectClass} {...register('clockBId')}><option value="">choose…</option>{all.data?.items.filter((c) => c.id !== clockAId).map((c) => <option key={c.id} value={c.id}>{c.name} · {c.speciesLabel} ({c.institute.code})</option>)}</select>
          </Field>
          <Field label="Fibre link joining the two sites" error={errors.linkId?.message}>
            <select className={selectClass} {...register('linkId')} value={linkId ?? ''}><option value="">choose…</option>{joining?.map((l) => <option key={l.id} value={l.id}>{l.name}</option>)}</select>
          </Field>
          <Field label="Period start (UTC)" error={errors.periodStart?.message}><input type="datetime-local" className={inputClass} {...register('periodStart')} /></Field>
          <Field label="Period end (UTC)" error={errors.periodEnd?.message}><input type="datetime-local" className={inputClass} {...register('periodEnd')} /></Field>
        </div>
        <fieldset className="rounded-md border border-paper-200 p-3">
          <legend className="px-1 text-sm font-semibold text-ink-700">Role</legend>
          <div className="grid gap-3 md:grid-cols-3">
            <Field label="Campaign role" error={errors.role?.message} hint="sites come from where the clocks stood during the period">
              <select className={selectClass} {...register('role')} data-testid="campaign-role">
                {campaignRoles.map((r) => <option key={r} value={r}>{campaignRoleLabels[r]}</option>)}
              </select>
            </Field>
            {role === 'side-by-side' && (
              <Field label="Local tie ΔC = C(site B) − C(site A)" error={errors.tieKind?.message}>
                <select className={selectClass} {...register('tieKind')} data-testid="local-tie-kind">
                  <option value="same-site">Same site: ΔC = 0</option>
                  <option value="entered">Entered with its source</option>
                  <option value="benchmarks">From both sites’ benchmark ties (ΔC = g·Δh)</option>
                </select>
              </Field>
            )}
            {role === 'side-by-side' && tieKind === 'benchmarks' && (
              <Field label="Gravity g (m/s²)" error={errors.tieGravity?.message}><input className={`${inputClass} font-mono`} {...register('tieGravity', { setValueAs: (v: string) => (v === '' ? undefined : Number(v)) })} /></Field>
            )}
          </div>
          {role === 'side-by-side' && tieKind === 'entered' && (
            <div className="mt-2 grid gap-3 md:grid-cols-3">
              <Field label="ΔC_local (m²/s²)" error={errors.tieDeltaC?.message}><input className={`${inputClass} font-mono`} data-testid="tie-delta-c" {...register('tieDeltaC', { setValueAs: (v: string) => (v === '' ? undefined : Number(v)) })} /></Field>
              <Field label="Standard uncertainty (m²/s², k = 1)" error={errors.tieU?.message}><input className={`${inputClass} font-mono`} data-testid="tie-u" {...register('tieU', { setValueAs: (v: string) => (v === '' ? undefined : Number(v)) })} /></Field>
              <Field label="Source of the tie" error={errors.tieSource?.message}><input className={inputClass} data-testid="tie-source" {...register('tieSource')} /></Field>
            </div>
          )}
          {role === 'side-by-side' && <p className="mt-2 text-xs text-ink-500">The result shows the offset between the clocks, y − ΔC_local/c², with its uncertainty; the campaign does not enter the network adjustment.</p>}
        </fieldset>
        <Field label="Operator notes" error={errors.operatorNotes?.message}><textarea rows={2} className={inputClass} {...register('operatorNotes')} /></Field>
        <fieldset className="rounded-md border border-paper-200 p-3">
          <legend className="px-1 text-sm font-semibold text-ink-700">Reference ratio {typeset('ν_B/ν_A')}</legend>
          {ratio.data ? (
            <p className="text-sm" data-testid="default-ratio">Default: <span className="font-mono">{ratio.data.value}</span>, u_r = {sci(ratio.data.relativeUncertainty, 2)} <span className="block text-xs text-ink-500">{ratio.data.source}</span></p>
          ) : ratio.isError ? <p className="text-sm text-brass-600">{describeError(ratio.error)}</p> : <p className="text-sm text-ink-500">Choose both clocks to see the default.</p>}
          <label className="mt-2 flex items-center gap-2 text-sm"><input type="checkbox" {...register('override')} /> Use a different reference ratio</label>
          {override && (
            <div className="mt-2 grid gap-3 md:grid-cols-3">
              <Field label="Ratio (decimal)" error={errors.ratioValue?.message}><input className={`${inputClass} font-mono`} {...register('ratioValue')} /></Field>
              <Field label="Relative uncertainty" error={errors.ratioU?.message}><input className={`${inputClass} font-mono`} {...register('ratioU', { setValueAs: (v: string) => (v === '' ? undefined : Number(v)) })} /></Field>
              <Field label="Justification (required)" error={errors.justification?.message}><input className={inputClass} {...register('justification')} /></Field>
            </div>
          )}
        </fieldset>
        <FormError text={formError} />
        <div className="flex gap-2">
          <Button type="submit" disabled={create.isPending}>Create draft</Button>
          <Button type="button" variant="quiet" onClick={onDone}>Cancel</Button>
        </div>
      </form>
    </Panel>
  );
}
