import { useState } from 'react';
import { useForm } from 'react-hook-form';
import { Link } from 'react-router';
import type { Deployment } from '../../../shared/deployments';
import { useAddDeployment, useDeployments, useRemoveDeployment, useSites, useUpdateDeployment } from '../../api/registry';
import { Button, Field, inputClass, Panel } from '../../components/ui';
import { applyServerErrors, FormError, selectClass } from './registry-ui';

// Where a transportable clock stood and when: a timeline bar (one band per deployment, gaps are transports) and
// the table with add / change / remove for lab staff of the clock's institute and the coordinator.

const day = (iso: string | null) => (iso ? iso.slice(0, 16).replace('T', ' ') : 'still there');
const bandColours = ['bg-ink-600', 'bg-brass-600', 'bg-ink-400', 'bg-brass-500', 'bg-ink-800'];

export function DeploymentsPanel({ clockId }: { clockId: string }) {
  const q = useDeployments(clockId);
  const [editing, setEditing] = useState<Deployment | 'new' | null>(null);
  if (!q.data) return null;
  const { clock, deployments, canWrite } = q.data;
  if (clock.mobility !== 'transportable') {
    return (
      <Panel title="Deployments">
        <p className="text-sm text-ink-500">Stationary clock: it always stands at <Link to={`/sites/${clock.homeSite.id}`}>{clock.homeSite.name}</Link>. Mark it transportable (Change clock) to record deployments.</p>
      </Panel>
    );
  }
  return (
    <Panel title="Deployment timeline" actions={canWrite && editing === null ? <Button onClick={() => setEditing('new')} data-testid="add-deployment">Add deployment</Button> : undefined}>
      <TimelineBar deployments={deployments} />
      {editing !== null && <DeploymentForm clockId={clockId} deployment={editing === 'new' ? null : editing} onDone={() => setEditing(null)} />}
      <table className="mt-3 min-w-full text-sm" data-testid="deployments-table">
        <thead className="text-left text-ink-500"><tr><th className="py-1">Site</th><th>Arrived (UTC)</th><th>Departed (UTC)</th><th>Budget versions</th><th>Note</th>{canWrite && <th />}</tr></thead>
        <tbody>
          {deployments.map((d) => (
            <tr key={d.id} className="border-t border-paper-200">
              <td className="py-1.5"><Link to={`/sites/${d.site.id}`}>{d.site.name}</Link> <span className="text-xs text-ink-500">{d.site.instituteCode}</span></td>
              <td className="font-mono">{day(d.arrivedAt)}</td>
              <td className="font-mono">{day(d.departedAt)}</td>
              <td>{d.budgetVersions.length ? d.budgetVersions.map((v) => `v${v}`).join(', ') : '—'}</td>
              <td className="text-ink-600">{d.note}</td>
              {canWrite && <td><RowActions clockId={clockId} deployment={d} onEdit={() => setEditing(d)} /></td>}
            </tr>
          ))}
        </tbody>
      </table>
      {deployments.length === 0 && <p className="mt-2 text-sm text-ink-500">No deployments recorded: campaigns with this clock are refused until one covers their period.</p>}
      <p className="mt-2 text-xs text-ink-500">A campaign takes its sites from the deployment covering its whole period; a period during which the clock moved is refused.</p>
    </Panel>
  );
}

function RowActions({ clockId, deployment, onEdit }: { clockId: string; deployment: Deployment; onEdit: () => void }) {
  const remove = useRemoveDeployment();
  const [error, setError] = useState<string | null>(null);
  return (
    <span className="flex gap-2 text-xs">
      <button className="underline" onClick={onEdit}>change</button>
      <button className="underline text-disagree-800" onClick={() => remove.mutate({ clockId, id: deployment.id }, { onError: (e) => setError(e instanceof Error ? e.message : String(e)) })}>remove</button>
      {error && <span className="text-disagree-800">{error}</span>}
    </span>
  );
}

/** Bands on one time axis from the first arrival to the last departure (or today for an open deployment). */
function TimelineBar({ deployments }: { deployments: Deployment[] }) {
  if (deployments.length === 0) return null;
  const start = Math.min(...deployments.map((d) => Date.parse(d.arrivedAt)));
  const end = Math.max(...deployments.map((d) => (d.departedAt ? Date.parse(d.departedAt) : Math.max(Date.parse(d.arrivedAt) + 30 * 86_400_000, Date.now()))));
  const span = Math.max(end - start, 1);
  const sites = [...new Set(deployments.map((d) => d.site.id))];
  return (
    <div data-testid="deployment-timeline">
      <div className="relative h-9 w-full rounded bg-paper-200" role="img" aria-label="Deployment timeline">
        {deployments.map((d) => {
          const a = Date.parse(d.arrivedAt);
          const b = d.departedAt ? Date.parse(d.departedAt) : end;
          const colour = bandColours[sites.indexOf(d.site.id) % bandColours.length];
          return (
            <div
              key={d.id}
              className={`absolute top-1 bottom-1 overflow-hidden rounded-sm px-1 text-[11px] leading-7 text-white ${colour} ${d.departedAt ? '' : 'opacity-80'}`}
              style={{ left: `${((a - start) / span) * 100}%`, width: `${Math.max(((b - a) / span) * 100, 0.8)}%` }}
              title={`${d.site.name}: ${day(d.arrivedAt)} – ${day(d.departedAt)}`}
            >
              {d.site.name}
            </div>
          );
        })}
      </div>
      <div className="mt-1 flex justify-between text-xs text-ink-500"><span>{day(new Date(start).toISOString()).slice(0, 10)}</span><span>gaps are transports</span><span>{day(new Date(end).toISOString()).slice(0, 10)}</span></div>
    </div>
  );
}

type FormValues = { siteId: string; arrivedAt: string; departedAt: string; note: string };
const toLocal = (iso: string | null) => (iso ? iso.slice(0, 16) : '');
const toIso = (local: string) => new Date(`${local}:00Z`).toISOString();

function DeploymentForm({ clockId, deployment, onDone }: { clockId: string; deployment: Deployment | null; onDone: () => void }) {
  const sites = useSites({ page: 1, pageSize: 200, order: 'asc', q: '' });
  const add = useAddDeployment();
  const update = useUpdateDeployment();
  const [formError, setFormError] = useState<string | null>(null);
  const { register, handleSubmit, setError, formState: { errors } } = useForm<FormValues>({
    defaultValues: { siteId: deployment?.site.id ?? '', arrivedAt: toLocal(deployment?.arrivedAt ?? null), departedAt: toLocal(deployment?.departedAt ?? null), note: deployment?.note ?? '' },
  });
  const known = ['siteId', 'arrivedAt', 'departedAt', 'note'];
  return (
    <form
      className="mt-3 grid gap-3 rounded border border-paper-200 bg-paper-50 p-3 md:grid-cols-2"
      data-testid="deployment-form"
      onSubmit={handleSubmit((v) => {
        setFormError(null);
        if (!v.siteId) return setError('siteId', { message: 'choose a site' });
        if (!v.arrivedAt) return setError('arrivedAt', { message: 'required' });
        const body = { siteId: v.siteId, arrivedAt: toIso(v.arrivedAt), departedAt: v.departedAt ? toIso(v.departedAt) : null, note: v.note };
        const onError = (e: unknown) => setFormError(applyServerErrors(e, setError, known));
        if (deployment) update.mutate({ clockId, id: deployment.id, body }, { onSuccess: onDone, onError });
        else add.mutate({ clockId, body }, { onSuccess: onDone, onError });
      })}
    >
      <Field label="Site" error={errors.siteId?.message}>
        <select className={selectClass} {...register('siteId')} data-testid="deployment-site">
          <option value="">Choose…</option>
          {sites.data?.items.map((s) => <option key={s.id} value={s.id}>{s.name} ({s.institute.code})</option>)}
        </select>
      </Field>
      <Field label="Note" error={errors.note?.message}><input className={inputClass} {...register('note')} placeholder="transport, re-assembly, re-evaluation…" /></Field>
      <Field label="Arrived (UTC)" error={errors.arrivedAt?.message}><input type="datetime-local" className={inputClass} {...register('arrivedAt')} data-testid="deployment-arrived" /></Field>
      <Field label="Departed (UTC, empty: still there)" error={errors.departedAt?.message}><input type="datetime-local" className={inputClass} {...register('departedAt')} data-testid="deployment-departed" /></Field>
      <div className="md:col-span-2"><FormError text={formError} /></div>
      <div className="flex gap-2 md:col-span-2">
        <Button type="submit" disabled={add.isPending || update.isPending} data-testid="save-deployment">{deployment ? 'Save changes' : 'Add deployment'}</Button>
        <Button type="button" variant="quiet" onClick={onDone}>Cancel</Button>
      </div>
    </form>
  );
}
