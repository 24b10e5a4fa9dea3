import { useState } from 'react';
import { Link, useSearchParams } from 'react-router';
import { useAllSessions, useAllTokens, useEndSession, useRevokeAnyToken, useUsers } from '../../api/account';
import { Button, EmptyState, Panel } from '../../components/ui';
import { describeError } from '../../lib/api-client';
import { utcMinute } from './format';

const PAGE = 25;

function Pager({ page, total, onPage }: { page: number; total: number; onPage: (p: number) => void }) {
  const pages = Math.max(1, Math.ceil(total / PAGE));
  return (
    <div className="mt-2 flex items-center justify-between text-xs text-ink-500">
      <span>{total} in all · page {page} of {pages}</span>
      <span className="flex gap-2">
        <Button variant="quiet" disabled={page <= 1} onClick={() => onPage(page - 1)}>Previous</Button>
        <Button variant="quiet" disabled={page >= pages} onClick={() => onPage(page + 1)}>Next</Button>
      </span>
    </div>
  );
}

const tokenState = (t: { revokedAt: string | null; expiresAt: string }) =>
  t.revokedAt ? `revoked ${utcMinute(t.revokedAt)}` : new Date(t.expiresAt).getTime() <= Date.now() ? 'expired' : 'active';

export function AccessPage() {
  const [params, setParams] = useSearchParams();
  const userId = params.get('userId') ?? undefined;
  const people = useUsers({ page: 1, pageSize: 500, sort: 'email', order: 'asc' });
  const person = people.data?.items.find((u) => u.id === userId);
  const [sessionPage, setSessionPage] = useState(1);
  const [tokenPage, setTokenPage] = useState(1);
  const [onlyActive, setOnlyActive] = useState(true);
  const sessions = useAllSessions({ page: sessionPage, pageSize: PAGE, userId });
  const tokens = useAllTokens({ page: tokenPage, pageSize: PAGE, userId, active: onlyActive || undefined });
  const endSession = useEndSession();
  const revoke = useRevokeAnyToken();
  return (
    <>
      <h1>Sessions and API tokens</h1>
      <p className="text-sm text-ink-600">
        Everyone’s open browser sessions and personal API tokens. Ending a session signs that browser out at its next
        request; a revoked token stops working at once and cannot be restored. A browser session also ends by itself after
        30 minutes without activity and 12 hours after sign-in.
      </p>
      <div className="flex flex-wrap items-center gap-3 text-sm">
        <label className="flex items-center gap-2">
          <span className="font-medium">Person</span>
          <select aria-label="Person" className="rounded-md border border-ink-200 bg-white px-2 py-1" value={userId ?? ''}
            onChange={(e) => { setSessionPage(1); setTokenPage(1); setParams(e.target.value ? { userId: e.target.value } : {}); }}>
            <option value="">everyone</option>
            {people.data?.items.map((u) => <option key={u.id} value={u.id}>{u.displayName} ({u.email})</option>)}
          </select>
        </label>
        {person && <Link to="/admin" className="text-xs">back to people</Link>}
      </div>

      <Panel title={`Open sessions${person ? ` of ${person.displayName}` : ''}`}>
        {sessions.data && sessions.data.total === 0 ? (
          <EmptyState title="No open sessions">Nobody{person ? ` by that name` : ''} is signed in in a browser right now.</EmptyState>
        ) : (
          <table className="min-w-full text-sm" data-testid="sessions">
            <thead className="text-left text-ink-500"><tr><th className="py-1">Person</th><th>Signed in</th><th>Ends without activity</th><th>Session</th><th /></tr></thead>
            <tbody>
              {sessions.data?.items.map((s) => (
                <tr key={s.id} className="border-t border-paper-200">
                  <td className="py-1.5">{s.person.displayName} <span className="text-xs text-ink-500">{s.person.email}</span></td>
                  <td>{utcMinute(s.signedInAt, 'unknown')}</td>
                  <td>{utcMinute(s.expiresAt)}</td>
                  <td><code className="text-xs" title="first characters of the SHA-256 of the session id">{s.id.slice(0, 10)}</code></td>
                  <td className="text-right"><Button variant="quiet" disabled={endSession.isPending} onClick={() => endSession.mutate(s.id)}>End session</Button></td>
                </tr>
              ))}
            </tbody>
          </table>
        )}
        {sessions.data && sessions.data.total > PAGE && <Pager page={sessionPage} total={sessions.data.total} onPage={setSessionPage} />}
        {endSession.error && <p className="mt-2 text-sm text-disagree-600" role="alert">{describeError(endSession.error)}</p>}
      </Panel>

      <Panel title={`API tokens${person ? ` of ${person.displayName}` : ''}`}
        actions={<label className="flex items-center gap-2 text-sm"><input type="checkbox" checked={onlyActive} onChange={(e) => { setTokenPage(1); setOnlyActive(e.target.checked); }} /> only active</label>}>
        {tokens.data && tokens.data.total === 0 ? (
          <EmptyState title={onlyActive ? 'No active tokens' : 'No tokens'} />
        ) : (
          <table className="min-w-full text-sm" data-testid="tokens">
            <thead className="text-left text-ink-500"><tr><th className="py-1">Person</th><th>Name</th><th>Starts with</th><th>Created</th><th>Expires</th><th>Last used</th><th>State</th><th /></tr></thead>
            <tbody>
              {tokens.data?.items.map((t) => (
                <tr key={t.id} className="border-t border-paper-200">
                  <td className="py-1.5">{t.owner?.displayName ?? '—'}</td>
                  <td>{t.name}</td>
                  <td><code>{t.prefix}…</code></td>
                  <td>{t.createdAt.slice(0, 10)}</td>
                  <td>{t.expiresAt.slice(0, 10)}</td>
                  <td>{utcMinute(t.lastUsedAt)}</td>
                  <td>{tokenState(t)}</td>
                  <td className="text-right">{tokenState(t) === 'active' && <Button variant="quiet" disabled={revoke.isPending} onClick={() => revoke.mutate(t.id)}>Revoke</Button>}</td>
                </tr>
              ))}
            </tbody>
          </table>
        )}
        {tokens.data && tokens.data.total > PAGE && <Pager page={tokenPage} total={tokens.data.total} onPage={setTokenPage} />}
        {revoke.error && <p className="mt-2 text-sm text-disagree-600" role="alert">{describeError(revoke.error)}</p>}
      </Panel>
    </>
  );
}
