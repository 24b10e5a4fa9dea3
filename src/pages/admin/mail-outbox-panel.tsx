import { useState } from 'react';
import type { MailState } from '../../../shared/mail-outbox';
import { useMailOutbox, useRetryMail } from '../../api/mail-outbox';
import { Button, Panel } from '../../components/ui';
import { describeError } from '../../lib/api-client';

const stateLabels: Record<MailState, string> = { dead: 'Given up', pending: 'Waiting to send', sent: 'Sent' };
const stamp = (iso: string | null) => (iso ? `${iso.replace('T', ' ').slice(0, 16)} UTC` : '—');

/** Outgoing mail by state; a message the sender gave up on can be sent again from here. */
export function MailOutboxPanel() {
  const [state, setState] = useState<MailState>('dead');
  const [page, setPage] = useState(1);
  const list = useMailOutbox(state, page);
  const retry = useRetryMail();
  const counts = list.data?.counts;
  return (
    <Panel title="Outgoing mail">
      <p className="mb-3 text-xs text-ink-500">
        Failed messages are retried with growing pauses (up to an hour apart). After three days without success a message is
        given up and listed here; nothing is deleted.
      </p>
      <div role="tablist" aria-label="Mail state" className="mb-3 flex gap-2">
        {(['dead', 'pending', 'sent'] as const).map((s) => (
          <Button key={s} role="tab" aria-selected={state === s} variant={state === s ? 'primary' : 'quiet'} onClick={() => { setState(s); setPage(1); }}>
            {stateLabels[s]} ({counts?.[s] ?? '…'})
          </Button>
        ))}
      </div>
      {retry.error ? <p role="alert" className="mb-2 text-sm text-red-700">{describeError(retry.error)}</p> : null}
      <table className="w-full text-left text-sm [&_td]:px-2 [&_td]:py-1.5 [&_th]:bg-paper-100 [&_th]:px-2 [&_th]:py-1.5 [&_th]:font-semibold">
        <thead>
          <tr><th>To</th><th>Subject</th><th>Queued</th><th>Tries</th><th>Last error</th><th>{state === 'pending' ? 'Next try' : state === 'sent' ? 'Sent' : 'Given up'}</th><th /></tr>
        </thead>
        <tbody>
          {list.data?.items.map((m) => (
            <tr key={m.id} className="border-t border-paper-200 align-top">
              <td>{m.to}</td>
              <td>{m.subject}</td>
              <td>{stamp(m.createdAt)}</td>
              <td>{m.attempts}</td>
              <td className="max-w-xs break-words text-xs">{m.lastError ?? '—'}</td>
              <td>{stamp(state === 'pending' ? m.nextAttemptAt : state === 'sent' ? m.sentAt : m.deadAt)}</td>
              <td>{m.state === 'dead' ? <Button variant="quiet" disabled={retry.isPending} onClick={() => retry.mutate(m.id)}>Send again</Button> : null}</td>
            </tr>
          ))}
        </tbody>
      </table>
      {list.data && list.data.items.length === 0 ? <p className="mt-2 text-sm text-ink-500">No messages in this state.</p> : null}
      {list.data && list.data.total > list.data.pageSize ? (
        <div className="mt-2 flex gap-2">
          <Button variant="quiet" disabled={page <= 1} onClick={() => setPage(page - 1)}>Previous</Button>
          <Button variant="quiet" disabled={page * list.data.pageSize >= list.data.total} onClick={() => setPage(page + 1)}>Next</Button>
        </div>
      ) : null}
    </Panel>
  );
}
