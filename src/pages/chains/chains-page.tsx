import { createColumnHelper } from '@tanstack/react-table';
import { useState } from 'react';
import { Link, useNavigate } from 'react-router';
import type { Chain, CreateChain } from '../../../shared/chains';
import { useMe } from '../../api/account';
import { useChainCandidates, useChains, useCreateChain } from '../../api/chains';
import { DataTable, type TableState } from '../../components/data-table';
import { Button, Field, inputClass, Panel } from '../../components/ui';
import { ApiError, describeError } from '../../lib/api-client';
import { FormError, selectClass } from '../registry/registry-ui';

const col = createColumnHelper<Chain>();
const columns = [
  col.accessor('name', { header: 'Chain', cell: (c) => <Link to={`/chains/${c.row.original.id}`}>{c.getValue()}</Link> }),
  col.accessor('state', { header: 'State', enableSorting: false, cell: (c) => (c.getValue() === 'accepted' ? 'accepted (all campaigns accepted)' : 'pending (a campaign is not accepted yet)') }),
  col.accessor((c) => c.transportableClock.name, { id: 'clock', header: 'Transportable clock', enableSorting: false }),
  col.accessor((c) => c.referenceClock.name, { id: 'reference', header: 'Reference clock', enableSorting: false }),
  col.accessor((c) => [c.beforeCampaign && 'before', 'remote', c.afterCampaign && 'after'].filter(Boolean).join(' · '), { id: 'parts', header: 'Parts', enableSorting: false }),
  col.accessor('createdAt', { header: 'Created', cell: (c) => c.getValue().slice(0, 10) }),
];

export function ChainsPage() {
  const me = useMe();
  const [state, setState] = useState<TableState>({ page: 1, pageSize: 20, sort: 'createdAt', order: 'desc', q: '' });
  const chains = useChains(state);
  const [adding, setAdding] = useState(false);
  const canCreate = me.data?.role === 'operator' || me.data?.role === 'coordinator';
  return (
    <>
      <header className="flex items-end justify-between">
        <div>
          <h1>Calibration chains</h1>
          <p className="text-sm text-ink-500">A transportable clock compared at a remote site, and side by side with the same reference clock before and/or after: its own systematic offset cancels in the difference.</p>
        </div>
        {canCreate && !adding && <Button onClick={() => setAdding(true)}>New chain</Button>}
      </header>
      {adding && <NewChainForm onDone={() => setAdding(false)} />}
      <Panel>
        <DataTable columns={columns as never} rows={chains.data?.items ?? []} total={chains.data?.total ?? 0} state={state} onState={setState} loading={chains.isFetching} filterLabel="Filter by name" />
      </Panel>
    </>
  );
}

function NewChainForm({ onDone }: { onDone: () => void }) {
  const candidates = useChainCandidates(true);
  const create = useCreateChain();
  const navigate = useNavigate();
  const [f, setF] = useState({ name: '', transportableClockId: '', referenceClockId: '', remoteCampaignId: '', beforeCampaignId: '', afterCampaignId: '', transport: '', transportSource: '', notes: '' });
  const [errors, setErrors] = useState<Map<string, string>>(new Map());
  const [formError, setFormError] = useState<string | null>(null);
  const set = (k: keyof typeof f) => (e: { target: { value: string } }) => setF({ ...f, [k]: e.target.value });
  const c = candidates.data;
  const ofT = (c?.campaigns ?? []).filter((x) => x.clockAId === f.transportableClockId || x.clockBId === f.transportableClockId);
  const remote = ofT.filter((x) => x.role === 'remote');
  const sbs = ofT.filter((x) => x.role === 'side-by-side');
  // Reference clocks: the partners of T in its side-by-side campaigns.
  const partners = [...new Set(sbs.map((x) => (x.clockAId === f.transportableClockId ? x.clockBId : x.clockAId)))];
  const sbsWithR = sbs.filter((x) => x.clockAId === f.referenceClockId || x.clockBId === f.referenceClockId);
  const clockName = (id: string) => {
    const cmp = sbs.find((x) => x.clockAId === id || x.clockBId === id);
    return cmp ? (cmp.clockAId === id ? cmp.clockAName : cmp.clockBName) : id;
  };
  async function submit() {
    setErrors(new Map());
    setFormError(null);
    const body: CreateChain = {
      name: f.name, transportableClockId: f.transportableClockId, referenceClockId: f.referenceClockId, remoteCampaignId: f.remoteCampaignId,
      beforeCampaignId: f.beforeCampaignId || null, afterCampaignId: f.afterCampaignId || null,
      transportReproducibility: f.transport.trim() ? Number(f.transport) : null, transportReproducibilitySource: f.transportSource.trim() || null, notes: f.notes,
    };
    try {
      const made = await create.mutateAsync(body);
      onDone();
      navigate(`/chains/${made.id}`);
    } catch (e) {
      if (e instanceof ApiError) {
        const m = new Map<string, string>();
        for (const i of e.problem.issues ?? []) m.set(i.path.replace(/^body\./, ''), i.message);
        setErrors(m);
        setFormError(m.size ? 'Some fields need attention.' : e.problem.detail);
      } else setFormError(describeError(e));
    }
  }
  return (
    <Panel title="New calibration chain">
      <div className="grid gap-3 md:grid-cols-2">
        <Field label="Name" error={errors.get('name')}><input className={inputClass} value={f.name} onChange={set('name')} /></Field>
        <Field label="Transportable clock" error={errors.get('transportableClockId')}>
          <select className={selectClass} value={f.transportableClockId} onChange={(e) => setF({ ...f, transportableClockId: e.target.value, referenceClockId: '', remoteCampaignId: '', beforeCampaignId: '', afterCampaignId: '' })}>
            <option value="">choose…</option>
            {(c?.clocks ?? []).map((k) => <option key={k.id} value={k.id}>{k.name} ({k.instituteCode})</option>)}
          </select>
        </Field>
        <Field label="Reference clock (its side-by-side partner)" error={errors.get('referenceClockId')}>
          <select className={selectClass} value={f.referenceClockId} onChange={set('referenceClockId')} disabled={!f.transportableClockId}>
            <option value="">choose…</option>
            {partners.map((id) => <option key={id} value={id}>{clockName(id)}</option>)}
          </select>
        </Field>
        <Field label="Remote campaign" error={errors.get('remoteCampaignId')}>
          <select className={selectClass} value={f.remoteCampaignId} onChange={set('remoteCampaignId')} disabled={!f.transportableClockId}>
            <option value="">choose…</option>
            {remote.map((x) => <option key={x.id} value={x.id}>{x.name}</option>)}
          </select>
        </Field>
        <Field label="Side-by-side before" error={errors.get('beforeCampaignId')}>
          <select className={selectClass} value={f.beforeCampaignId} onChange={set('beforeCampaignId')} disabled={!f.referenceClockId}>
            <option value="">none</option>
            {sbsWithR.map((x) => <option key={x.id} value={x.id}>{x.name}</option>)}
          </select>
        </Field>
        <Field label="Side-by-side after" error={errors.get('afterCampaignId')}>
          <select className={selectClass} value={f.afterCampaignId} onChange={set('afterCampaignId')} disabled={!f.referenceClockId}>
            <option value="">none</option>
            {sbsWithR.map((x) => <option key={x.id} value={x.id}>{x.name}</option>)}
          </select>
        </Field>
        <Field label="Transport reproducibility (fractional, standard uncertainty)" hint="Leave empty to take it from the before/after difference (needs both)." error={errors.get('transportReproducibility')}>
          <input className={inputClass} value={f.transport} onChange={set('transport')} placeholder="e.g. 2e-18" />
        </Field>
        <Field label="Its source" error={errors.get('transportReproducibilitySource')}><input className={inputClass} value={f.transportSource} onChange={set('transportSource')} /></Field>
      </div>
      <div className="mt-3 flex gap-2">
        <Button onClick={submit} disabled={create.isPending}>Create chain</Button>
        <Button variant="quiet" onClick={onDone}>Cancel</Button>
      </div>
      <FormError text={formError} />
    </Panel>
  );
}
