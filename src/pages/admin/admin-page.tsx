import { createColumnHelper } from '@tanstack/react-table';
import { useMemo, useState } from 'react';
import { Link } from 'react-router';
import { roleLabels, roles, type CreateInstitute, type Institute, type Role, type User } from '../../../shared/auth';
import { useChangeRole, useCreateInstitute, useInstitutes, useMe, useSetActive, useUpdateInstitute, useUsers } from '../../api/account';
import { DataTable, type TableState } from '../../components/data-table';
import { Button, Field, inputClass, Panel } from '../../components/ui';
import { describeError } from '../../lib/api-client';
import { utcMinute } from './format';
import { MailOutboxPanel } from './mail-outbox-panel';


const kinds: { value: Institute['kind']; label: string }[] = [
  { value: 'laboratory', label: 'Laboratory' },
  { value: 'coordinating', label: 'Coordinating institute' },
  { value: 'audit', label: 'Audit body' },
  { value: 'other', label: 'Other' },
];
const kindLabel = (k: Institute['kind']) => kinds.find((x) => x.value === k)?.label ?? k;

function InstituteForm({ initial, withCode, submitLabel, busy, error, onSubmit, onCancel }: {
  initial: CreateInstitute; withCode: boolean; submitLabel: string; busy: boolean; error: string | null;
  onSubmit: (v: CreateInstitute) => void; onCancel?: () => void;
}) {
  const [v, setV] = useState(initial);
  const set = <K extends keyof CreateInstitute>(k: K, value: CreateInstitute[K]) => setV((old) => ({ ...old, [k]: value }));
  return (
    <form className="grid items-end gap-3 md:grid-cols-[8rem_1fr_12rem_12rem_auto]" onSubmit={(e) => { e.preventDefault(); onSubmit(v); }}>
      {withCode ? (
        <Field label="Code"><input className={inputClass} value={v.code} onChange={(e) => set('code', e.target.value.toUpperCase())} required /></Field>
      ) : (
        <Field label="Code"><input className={`${inputClass} bg-paper-100`} value={v.code} readOnly aria-readonly /></Field>
      )}
      <Field label="Name"><input className={inputClass} value={v.name} onChange={(e) => set('name', e.target.value)} required /></Field>
      <Field label="City"><input className={inputClass} value={v.city ?? ''} onChange={(e) => set('city', e.target.value || null)} /></Field>
      <Field label="Kind">
        <select className={inputClass} value={v.kind} onChange={(e) => set('kind', e.target.value as Institute['kind'])}>
          {kinds.map((k) => <option key={k.value} value={k.value}>{k.label}</option>)}
        </select>
      </Field>
      <span className="flex gap-2 pb-0.5">
        <Button type="submit" disabled={busy}>{submitLabel}</Button>
        {onCancel && <Button type="button" variant="quiet" onClick={onCancel}>Cancel</Button>}
      </span>
      <p className="text-xs text-ink-500 md:col-span-5">
        {withCode ? 'Code: upper-case letters, digits and hyphens, as the identity provider sends it; it cannot change later.' : 'The code cannot change: identity providers and certificates refer to it.'}
      </p>
      {error && <p className="text-sm text-disagree-600 md:col-span-5" role="alert">{error}</p>}
    </form>
  );
}

function InstitutesPanel() {
  const institutes = useInstitutes();
  const create = useCreateInstitute();
  const update = useUpdateInstitute();
  const [editing, setEditing] = useState<string | null>(null);
  const [adding, setAdding] = useState(false);
  return (
    <Panel title="Institutes" actions={!adding && <Button variant="quiet" onClick={() => { create.reset(); setAdding(true); }}>Register an institute</Button>}>
      {adding && (
        <div className="mb-4 rounded-md border border-paper-200 bg-paper-50 p-3" role="region" aria-label="New institute">
          <h3 className="mb-2 text-sm font-semibold">New institute</h3>
          <InstituteForm initial={{ code: '', name: '', city: null, kind: 'laboratory' }} withCode submitLabel="Register" busy={create.isPending}
            error={create.error ? describeError(create.error) : null} onCancel={() => setAdding(false)}
            onSubmit={(v) => create.mutate(v, { onSuccess: () => setAdding(false) })} />
        </div>
      )}
      <table className="min-w-full text-sm" data-testid="institutes">
        <thead className="text-left text-ink-500"><tr><th className="py-1">Code</th><th>Name</th><th>City</th><th>Kind</th><th /></tr></thead>
        <tbody>
          {institutes.data?.map((i) =>
            editing === i.id ? (
              <tr key={i.id} className="border-t border-paper-200">
                <td colSpan={5} className="py-2" role="region" aria-label={`Editing ${i.code}`}>
                  <InstituteForm initial={{ code: i.code, name: i.name, city: i.city, kind: i.kind }} withCode={false} submitLabel="Save" busy={update.isPending}
                    error={update.error ? describeError(update.error) : null} onCancel={() => setEditing(null)}
                    onSubmit={(v) => update.mutate({ id: i.id, patch: { name: v.name, city: v.city, kind: v.kind } }, { onSuccess: () => setEditing(null) })} />
                </td>
              </tr>
            ) : (
              <tr key={i.id} className="border-t border-paper-200">
                <td className="py-1.5 font-semibold">{i.code}</td><td>{i.name}</td><td>{i.city ?? '—'}</td><td>{kindLabel(i.kind)}</td>
                <td className="text-right"><Button variant="quiet" aria-label={`Edit ${i.code}`} onClick={() => { update.reset(); setEditing(i.id); }}>Edit</Button></td>
              </tr>
            ),
          )}
        </tbody>
      </table>
    </Panel>
  );
}

function AccountActions({ user, self, onDeactivate }: { user: User; self: boolean; onDeactivate: (u: User) => void }) {
  const setActive = useSetActive();
  if (user.deactivatedAt) {
    return <Button variant="quiet" disabled={setActive.isPending} onClick={() => setActive.mutate({ id: user.id, active: true })}>Reactivate</Button>;
  }
  if (self) return <span className="text-xs text-ink-400">you</span>;
  return <Button variant="quiet" onClick={() => onDeactivate(user)}>Deactivate…</Button>;
}

/** Asks before a deactivation and says what it does. */
function ConfirmDeactivation({ user, onDone }: { user: User; onDone: () => void }) {
  const setActive = useSetActive();
  return (
    <div className="mb-3 rounded-md border border-disagree-100 bg-disagree-100/40 p-3 text-sm" role="group" aria-label={`Deactivate ${user.displayName}`}>
      <p className="mb-2">
        Deactivate <strong>{user.displayName}</strong> ({user.email})? Sign-in is refused from now on; their open sessions end
        and all their API tokens are revoked at once. Reactivating later restores sign-in, not the tokens.
      </p>
      <span className="flex gap-2">
        <Button variant="danger" disabled={setActive.isPending} onClick={() => setActive.mutate({ id: user.id, active: false }, { onSuccess: onDone })}>Deactivate</Button>
        <Button variant="quiet" onClick={onDone}>Cancel</Button>
      </span>
      {setActive.error && <p className="mt-1 text-disagree-600" role="alert">{describeError(setActive.error)}</p>}
    </div>
  );
}

function RoleSelect({ user, self }: { user: User; self: boolean }) {
  const change = useChangeRole();
  return (
    <div className="w-48">
      <select aria-label={`Role of ${user.displayName}`} className={inputClass} value={user.role} disabled={self || change.isPending || !!user.deactivatedAt}
        onChange={(e) => change.mutate({ id: user.id, role: e.target.value as Role })}>
        {roles.map((r) => <option key={r} value={r}>{roleLabels[r]}</option>)}
      </select>
      {change.error && <p className="mt-1 text-xs text-disagree-600" role="alert">{describeError(change.error)}</p>}
    </div>
  );
}

const col = createColumnHelper<User>();

function PeoplePanel() {
  const me = useMe();
  const [state, setState] = useState<TableState>({ page: 1, pageSize: 20, sort: 'displayName', order: 'asc', q: '' });
  const users = useUsers(state);
  const [confirming, setConfirming] = useState<User | null>(null);
  const columns = useMemo(() => [
    col.accessor('displayName', {
      header: 'Person',
      cell: (c) => (
        <span className="block min-w-[13rem]">
          <span className="block font-medium">{c.getValue()}</span>
          <span className="block text-xs text-ink-500">{c.row.original.email}</span>
        </span>
      ),
    }),
    col.accessor('role', { header: 'Role', cell: (c) => <RoleSelect user={c.row.original} self={c.row.original.id === me.data?.id} /> }),
    col.accessor((u) => u.institute?.code ?? '—', { id: 'institute', header: 'Institute', enableSorting: false }),
    col.accessor('lastSignInAt', { header: 'Last sign-in', cell: (c) => <span className="whitespace-nowrap">{utcMinute(c.getValue())}</span> }),
    col.accessor('deactivatedAt', {
      header: 'Account', enableSorting: false,
      cell: (c) => (c.getValue() ? <span className="whitespace-nowrap font-medium text-disagree-600">deactivated {utcMinute(c.getValue()).slice(0, 10)}</span> : 'active'),
    }),
    col.display({
      id: 'actions', header: '',
      cell: (c) => (
        <div className="flex w-44 flex-col items-start gap-1">
          <AccountActions user={c.row.original} self={c.row.original.id === me.data?.id} onDeactivate={setConfirming} />
          <Link className="text-xs" to={`/admin/access?userId=${c.row.original.id}`}>Sessions and tokens</Link>
        </div>
      ),
    }),
  ], [me.data?.id]);
  return (
    <Panel title="People">
      <p className="mb-3 text-sm text-ink-600">
        People appear at their first sign-in with the role and institute their identity provider asserts. After that the
        role set here is the one that counts: later sign-ins do not change it. Deactivating a person refuses their sign-in
        and ends their sessions and API tokens at once.
      </p>
      {confirming && <ConfirmDeactivation key={confirming.id} user={confirming} onDone={() => setConfirming(null)} />}
      <DataTable columns={columns as never} rows={users.data?.items ?? []} total={users.data?.total ?? 0} state={state} onState={setState} loading={users.isFetching} filterLabel="Filter by name, e-mail or institute" />
    </Panel>
  );
}

export function AdminPage() {
  return (
    <>
      <h1>Institutes and people</h1>
      <InstitutesPanel />
      <PeoplePanel />
      <MailOutboxPanel />
    </>
  );
}
