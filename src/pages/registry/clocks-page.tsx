import { zodResolver } from '@hookform/resolvers/zod';
import { createColumnHelper } from '@tanstack/react-table';
import { useState } from 'react';
import { useForm, type UseFormRegister } from 'react-hook-form';
import { Link, useNavigate } from 'react-router';
import { clockKindLabels, createClockSchema, type Clock, type CreateClock } from '../../../shared/registry';
import { useMe } from '../../api/account';
import { useClocks, useCreateClock, useSites } from '../../api/registry';
import { DataTable, type TableState } from '../../components/data-table';
import { Button, Field, Panel } from '../../components/ui';
import { BudgetEditor } from './budget-editor';
import { clockFieldNames, ClockFields, type ClockFieldValues } from './registry-forms';
import { applyServerErrors, FormError, groupDigits, sci, selectClass } from './registry-ui';

const col = createColumnHelper<Clock>();
const columns = [
  col.accessor('name', { header: 'Clock', cell: (c) => <Link to={`/clocks/${c.row.original.id}`}>{c.getValue()}</Link> }),
  col.accessor('species', { header: 'Species / transition', cell: (c) => c.row.original.speciesLabel }),
  col.accessor('kind', { header: 'Kind', cell: (c) => clockKindLabels[c.getValue()] }),
  col.accessor((c) => c.site.name, { id: 'site', header: 'Site' }),
  col.accessor((c) => c.institute.code, { id: 'institute', header: 'Institute' }),
  col.accessor('nominalFrequencyHz', { header: 'Nominal frequency (Hz)', enableSorting: false, cell: (c) => <span className="whitespace-nowrap font-mono">{groupDigits(c.getValue())}</span> }),
  col.accessor((c) => c.currentBudget?.totalUncertainty ?? null, { id: 'budget', header: 'Systematic u (k = 1)', enableSorting: false, cell: (c) => `${sci(c.getValue())} (v${c.row.original.currentBudget?.version ?? '—'})` }),
];

export function ClocksPage() {
  const me = useMe();
  const [state, setState] = useState<TableState>({ page: 1, pageSize: 20, sort: 'name', order: 'asc', q: '' });
  const clocks = useClocks(state);
  const [adding, setAdding] = useState(false);
  const canWrite = me.data?.role === 'operator' || me.data?.role === 'coordinator';
  return (
    <>
      <header className="flex items-end justify-between">
        <div>
          <h1>Clocks</h1>
          <p className="text-sm text-ink-500">Each clock keeps every version of its systematic budget; campaigns pin the version they used.</p>
        </div>
        {canWrite && !adding && <Button onClick={() => setAdding(true)}>New clock</Button>}
      </header>
      {adding && <NewClockForm onDone={() => setAdding(false)} />}
      <Panel>
        <DataTable columns={columns as never} rows={clocks.data?.items ?? []} total={clocks.data?.total ?? 0} state={state} onState={setState} loading={clocks.isFetching} filterLabel="Filter by clock, species, site or institute" />
      </Panel>
    </>
  );
}

function NewClockForm({ onDone }: { onDone: () => void }) {
  const me = useMe();
  const sites = useSites({ page: 1, pageSize: 200, order: 'asc', sort: 'name', q: '', instituteId: me.data?.role === 'operator' ? me.data.institute?.id : undefined });
  const create = useCreateClock();
  const navigate = useNavigate();
  const [formError, setFormError] = useState<string | null>(null);
  const { register, control, handleSubmit, watch, setError, formState: { errors } } = useForm<CreateClock>({
    resolver: zodResolver(createClockSchema) as never,
    defaultValues: { kind: 'optical_lattice', species: 'Sr87', nominalFrequencyHz: '', notes: '', mobility: 'stationary', budget: [{ effect: 'Blackbody radiation', correction: 0, uncertainty: 0, type: 'B', note: '' }] },
  });
  const rows = watch('budget') ?? [];
  return (
    <Panel title="New clock">
      <form className="space-y-4" onSubmit={handleSubmit((body) => {
        setFormError(null);
        create.mutate(body, {
          onSuccess: (c) => { onDone(); navigate(`/clocks/${c.id}`); },
          onError: (e) => setFormError(applyServerErrors(e, setError, ['siteId', ...clockFieldNames, 'budget'])),
        });
      })}>
        <ClockFields register={register as unknown as UseFormRegister<ClockFieldValues>} errors={errors} species={watch('species')} siteField={(
          <Field label="Site" error={errors.siteId?.message}>
            <select className={selectClass} {...register('siteId')}>
              <option value="">choose…</option>
              {sites.data?.items.map((s) => <option key={s.id} value={s.id}>{s.name} ({s.institute.code})</option>)}
            </select>
          </Field>
        )} />
        <div>
          <h3 className="mb-1 text-sm font-semibold text-ink-700">Systematic uncertainty budget (version 1)</h3>
          <BudgetEditor name="budget" control={control} register={register} errors={errors.budget} rows={rows as never} />
        </div>
        <FormError text={formError} />
        <div className="flex gap-2">
          <Button type="submit" disabled={create.isPending}>Save clock</Button>
          <Button type="button" variant="quiet" onClick={onDone}>Cancel</Button>
        </div>
      </form>
    </Panel>
  );
}
