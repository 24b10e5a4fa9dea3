import { useState } from 'react';
import { DEFAULT_TOKEN_DAYS, MAX_TOKEN_DAYS } from '../../../shared/auth';
import { useCreateToken, useRevokeToken, useTokens } from '../../api/account';
import { Button, Field, inputClass, Panel } from '../../components/ui';

export function TokensPage() {
  const tokens = useTokens();
  const create = useCreateToken();
  const revoke = useRevokeToken();
  const [name, setName] = useState('');
  const [days, setDays] = useState(DEFAULT_TOKEN_DAYS);
  return (
    <>
      <h1>My API tokens</h1>
      <Panel title="New token">
        <form className="flex items-end gap-3" onSubmit={(e) => { e.preventDefault(); if (name.trim()) create.mutate({ name: name.trim(), expiresInDays: days }, { onSuccess: () => setName('') }); }}>
          <div className="w-80"><Field label="What is it for?"><input className={inputClass} value={name} onChange={(e) => setName(e.target.value)} placeholder="nightly upload script" /></Field></div>
          <div className="w-44">
            <Field label="Valid for">
              <select className={inputClass} value={days} onChange={(e) => setDays(Number(e.target.value))}>
                {[7, 30, DEFAULT_TOKEN_DAYS, 180, MAX_TOKEN_DAYS].map((d) => <option key={d} value={d}>{d === MAX_TOKEN_DAYS ? '1 year (longest)' : `${d} days`}</option>)}
              </select>
            </Field>
          </div>
          <Button type="submit" disabled={!name.trim() || create.isPending}>Create token</Button>
        </form>
        {create.data && (
          <div className="mt-4 rounded-md bg-brass-300/40 p-3 text-sm">
            <p className="font-medium">Copy this token now; it is shown only once:</p>
            <code className="mt-1 block break-all font-mono" data-testid="new-token">{create.data.secret}</code>
            <p className="mt-1 text-xs">Send it as <code>Authorization: Bearer &lt;token&gt;</code>.</p>
          </div>
        )}
      </Panel>
      <Panel title="Tokens">
        <table className="min-w-full text-sm">
          <thead className="text-left text-ink-500"><tr><th className="py-1">Name</th><th>Starts with</th><th>Created</th><th>Expires</th><th>Last used</th><th>State</th><th /></tr></thead>
          <tbody>
            {tokens.data?.map((t) => (
              <tr key={t.id} className="border-t border-paper-200">
                <td className="py-1.5">{t.name}</td><td><code>{t.prefix}…</code></td>
                <td>{t.createdAt.slice(0, 10)}</td><td>{t.expiresAt.slice(0, 10)}</td><td>{t.lastUsedAt?.slice(0, 16).replace('T', ' ') ?? 'never'}</td>
                <td>{t.revokedAt ? 'revoked' : new Date(t.expiresAt).getTime() <= Date.now() ? 'expired' : 'active'}</td>
                <td>{!t.revokedAt && new Date(t.expiresAt).getTime() > Date.now() && <Button variant="quiet" onClick={() => revoke.mutate(t.id)}>Revoke</Button>}</td>
              </tr>
            ))}
          </tbody>
        </table>
      </Panel>
    </>
  );
}
