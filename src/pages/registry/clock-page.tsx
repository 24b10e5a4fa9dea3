import { zodResolver } from '@hookform/resolvers/zod';
import { Fragment, useState } from 'react';
import { useForm } from 'react-hook-form';
import { Link, useParams } from 'react-router';
import { clockKindLabels, newBudgetVersionSchema, type BudgetVersion, type Clock, type NewBudgetVersion } from '../../../shared/registry';
import { useMe } from '../../api/account';
import { useAddBudgetVersion, useBudgetVersions, useClock } from '../../api/registry';
import { Button, EmptyState, Field, inputClass, Panel } from '../../components/ui';
import { describeError } from '../../lib/api-client';
import { BudgetEditor, BudgetTable } from './budget-editor';
import { DeploymentsPanel } from './deployments-panel';
import { canChangeInstituteRecord, EditClockPanel } from './registry-forms';
import { applyServerErrors, Facts, FormError, groupDigits, sci } from './registry-ui';

export function ClockPage() {
  const { id = '' } = useParams();
  const me = useMe();
  const clock = useClock(id);
  const versions = useBudgetVersions(id);
  const [editing, setEditing] = useState(false);
  if (clock.isPending) return <p className="text-ink-500">Loading…</p>;
  if (clock.isError) return <EmptyState title="This clock could not be loaded">{describeError(clock.error)}</EmptyState>;
  const c = clock.data;
  const canEdit = canChangeInstituteRecord(me.data, c.institute.id);
  const current = c.currentBudget;
  return (
    <>
      <header>
        <p className="text-sm text-ink-500"><Link to="/clocks">Clocks</Link> / {c.institute.code}</p>
        <h1 data-testid="clock-title">{c.name}</h1>
      </header>
      <Panel title="Clock">
        <Facts items={[
          ['Kind', clockKindLabels[c.kind]],
          ['Species / transition', c.speciesLabel],
          ['Nominal frequency', <span key="f" className="font-mono" title={c.nominalFrequencyHz}>{groupDigits(c.nominalFrequencyHz)} Hz</span>],
          ['Mobility', <span key="m" data-testid="clock-mobility-fact">{c.mobility === 'transportable' ? 'Transportable (site below is its home base)' : 'Stationary'}</span>],
          ['Site', <Link key="s" to={`/sites/${c.site.id}`}>{c.site.name}</Link>],
          ['Notes', c.notes || '—'],
        ]} />
      </Panel>
      <Panel
        title={current ? `Systematic budget — version ${current.version}` : 'Systematic budget'}
        actions={canEdit && !editing ? <Button onClick={() => setEditing(true)}>Change budget</Button> : undefined}
      >
        {editing && current ? (
          <NewVersionForm clock={c} base={current} onDone={() => setEditing(false)} />
        ) : current ? (
          <>
            <p className="mb-2 text-xs text-ink-500">Saved by {current.createdBy} on {current.createdAt.slice(0, 16).replace('T', ' ')} UTC{current.comment ? ` · ${current.comment}` : ''}. Fractional values; totals: corrections summed, uncertainties by root-sum-square.</p>
            <BudgetTable rows={current.rows} totalCorrection={current.totalCorrection} totalUncertainty={current.totalUncertainty} />
          </>
        ) : null}
      </Panel>
      <DeploymentsPanel clockId={c.id} />
      {canEdit && <EditClockPanel clock={c} />}
      <Panel title="Version history">
        <VersionHistory versions={versions.data ?? []} />
      </Panel>
    </>
  );
}

function NewVersionForm({ clock, base, onDone }: { clock: Clock; base: BudgetVersion; onDone: () => void }) {
  const add = useAddBudgetVersion();
  const [formError, setFormError] = useState<string | null>(null);
  const { register, control, handleSubmit, watch, setError, formState: { errors } } = useForm<NewBudgetVersion>({
    resolver: zodResolver(newBudgetVersionSchema) as never,
    defaultValues: { rows: base.rows, comment: '' },
  });
  const rows = watch('rows') ?? [];
  return (
    <form className="space-y-3" onSubmit={handleSubmit((body) => {
      setFormError(null);
      add.mutate({ clockId: clock.id, body }, { onSuccess: onDone, onError: (e) => setFormError(applyServerErrors(e, setError, ['rows', 'comment'])) });
    })}>
      <p className="text-sm text-ink-600">Saving creates version {base.version + 1}; version {base.version} stays as it is for the campaigns that use it.</p>
      <BudgetEditor name="rows" control={control} register={register} errors={errors.rows} rows={rows as never} />
      <Field label="What changed?" error={errors.comment?.message}><input className={inputClass} {...register('comment')} /></Field>
      <FormError text={formError} />
      <div className="flex gap-2">
        <Button type="submit" disabled={add.isPending}>Save as version {base.version + 1}</Button>
        <Button type="button" variant="quiet" onClick={onDone}>Cancel</Button>
      </div>
    </form>
  );
}

function VersionHistory({ versions }: { versions: BudgetVersion[] }) {
  const [open, setOpen] = useState<number | null>(null);
  return (
    <table className="min-w-full text-sm" data-testid="budget-history">
      <thead className="text-left text-ink-500"><tr><th className="py-1">Version</th><th>Saved</th><th>By</th><th>Rows</th><th>Total correction</th><th>Total u (k = 1)</th><th>Comment</th><th /></tr></thead>
      <tbody>
        {versions.map((v) => (
          <Fragment key={v.id}>
            <tr className="border-t border-paper-200">
              <td className="py-1.5 font-semibold">v{v.version}</td>
              <td>{v.createdAt.slice(0, 16).replace('T', ' ')}</td>
              <td>{v.createdBy}</td>
              <td>{v.rows.length}</td>
              <td className="font-mono">{sci(v.totalCorrection, 4)}</td>
              <td className="font-mono">{sci(v.totalUncertainty)}</td>
              <td className="text-ink-500">{v.comment}</td>
              <td><button className="text-xs underline" onClick={() => setOpen(open === v.version ? null : v.version)}>{open === v.version ? 'hide' : 'show rows'}</button></td>
            </tr>
            {open === v.version && (
              <tr><td colSpan={8} className="bg-paper-50 p-3"><BudgetTable rows={v.rows} totalCorrection={v.totalCorrection} totalUncertainty={v.totalUncertainty} /></td></tr>
            )}
          </Fragment>
        ))}
      </tbody>
    </table>
  );
}
