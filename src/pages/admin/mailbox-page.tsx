import { useMailbox } from '../../api/account';
import { EmptyState, Panel } from '../../components/ui';

/** "YYYY-MM-DD hh:mm UTC", as on the other pages. */
const utcMinute = (iso: string) => {
  const d = new Date(iso);
  return Number.isNaN(d.getTime()) ? iso : `${d.toISOString().slice(0, 16).replace('T', ' ')} UTC`;
};

export function MailboxPage() {
  const mail = useMailbox();
  return (
    <>
      <h1>Test mailbox</h1>
      <p className="text-sm text-ink-500">Messages Chronolevel sent through the local test mailbox of this development set-up. Nothing leaves the machine.</p>
      {mail.data?.length === 0 && <EmptyState title="No messages yet" />}
      {mail.data?.map((m) => (
        <Panel key={m.id} title={m.subject}>
          <p className="text-xs text-ink-500">to {m.to.join(', ')} · {utcMinute(m.receivedAt)}</p>
          <pre className="mt-2 whitespace-pre-wrap text-sm">{m.text}</pre>
        </Panel>
      ))}
    </>
  );
}
