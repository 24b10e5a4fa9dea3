import { createColumnHelper } from '@tanstack/react-table';
import { useState } from 'react';
import { roleLabels, type User } from '../../../shared/auth';
import { useInstitutes, useUsers } from '../../api/account';
import { DataTable, type TableState } from '../../components/data-table';
import { Panel } from '../../components/ui';
import { MailOutboxPanel } from './mail-outbox-panel';

const col = createColumnHelper<User>();
const columns = [
  col.accessor('displayName', { header: 'Name' }),
  col.accessor('email', { header: 'E-mail' }),
  col.accessor('role', { header: 'Role', cell: (c) => roleLabels[c.getValue()] }),
  col.accessor((u) => u.institute?.code ?? '—', { id: 'institute', header: 'Institute', enableSorting: false }),
  col.accessor('lastSignInAt', { header: 'Last sign-in', cell: (c) => (c.getValue() ? new Date(c.getValue()!).toISOString().replace('T', ' ').slice(0, 16) + ' UTC' : 'never') }),
];

export function AdminPage() {
  const institutes = useInstitutes();
  const [state, setState] = useState<TableState>({ page: 1, pageSize: 20, sort: 'email', order: 'asc', q: '' });
  const users = useUsers(state);
  return (
    <>
      <h1>Institutes and people</h1>
      <Panel title="Institutes">
        <ul className="grid gap-2 md:grid-cols-2">
          {institutes.data?.map((i) => (
            <li key={i.id} className="rounded-md border border-paper-200 px-3 py-2 text-sm">
              <span className="font-semibold">{i.code}</span> · {i.name}
              <span className="block text-xs text-ink-500">{i.city ?? ''} · {i.kind}</span>
            </li>
          ))}
        </ul>
      </Panel>
      <Panel title="People">
        <p className="mb-3 text-xs text-ink-500">People appear after their first sign-in; role and institute come from the identity provider.</p>
        <DataTable columns={columns as never} rows={users.data?.items ?? []} total={users.data?.total ?? 0} state={state} onState={setState} loading={users.isFetching} filterLabel="Filter by name, e-mail or institute" />
      </Panel>
      <MailOutboxPanel />
    </>
  );
}
