import fs from 'node:fs';
import zlib from 'node:zlib';
import pino from 'pino';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, inject, it } from 'vitest';
import { SP_ENTITY_ID } from '../../server/auth/saml';
import { UserEntity } from '../../server/db/entities/core.entities';
import { buildSamlResponse } from '../../server/dev/saml-response';
import { createTestApp, signInAs, tokenFor, type TestApp } from '../helpers/test-app';

// Sessions and accounts (OWASP ASVS 4.0.3 V3.3.1 logout/expiry, V3.3.2 absolute and idle lifetimes, V3.3.4
// administrators can end sessions, V3.5 token expiry) and the role-authority rule of
// docs/decisions/0006-role-authority.md.
type LogLine = { securityEvent?: string; reason?: string };
const logLines: LogLine[] = [];
const logger = pino({ level: 'info' }, { write: (s: string) => void logLines.push(JSON.parse(s) as LogLine) });

let t: TestApp;
const ADMIN = 'yusra.holm@geopotential-office.invalid';
const OPERATOR = 'ines.varga@saltmarsh-lab.invalid';
const AUDITOR = 'petra.lind@audit-bureau.invalid';
const userId = async (email: string) => (await t.ds.getRepository(UserEntity).findOneByOrFail({ email })).id;

beforeAll(async () => {
  t = await createTestApp({ logger });
});
afterAll(() => t.close());

describe('session lifetimes', () => {
  it('sets a 30-minute rolling idle expiry on the session cookie', async () => {
    const { agent } = await signInAs(t, OPERATOR);
    const res = await agent.get('/api/v1/me');
    const expires = /Expires=([^;]+)/.exec(String(res.headers['set-cookie']))?.[1];
    const minutes = (new Date(expires!).getTime() - Date.now()) / 60_000;
    expect(minutes).toBeGreaterThan(28);
    expect(minutes).toBeLessThanOrEqual(30);
  });

  it('ends a session 12 hours after sign-in however active it was', async () => {
    const { agent } = await signInAs(t, OPERATOR);
    expect((await agent.get('/api/v1/me')).status).toBe(200);
    const id = await userId(OPERATOR);
    const count = async () => ((await t.ds.query(`SELECT 1 FROM "session" WHERE sess -> 'passport' ->> 'user' = $1`, [id])) as unknown[]).length;
    const before = await count();
    // Move this person's sign-in instants 12 h 1 min into the past (the store keeps the session JSON).
    await t.ds.query(
      `UPDATE "session" SET sess = jsonb_set(sess::jsonb, '{signedInAt}', to_jsonb($2::bigint))::json WHERE sess -> 'passport' ->> 'user' = $1`,
      [id, Date.now() - (12 * 60 + 1) * 60_000],
    );
    expect((await agent.get('/api/v1/me')).status).toBe(401);
    expect(await count()).toBe(before - 1); // this browser's session row is gone
    expect(logLines.some((l) => l.securityEvent === 'session.expired' && l.reason === 'absolute-lifetime')).toBe(true);
  });
});

describe('deactivating a person', () => {
  it('ends their sessions and tokens at once, refuses their sign-in, and reactivation does not revive old tokens', async () => {
    const admin = await signInAs(t, ADMIN);
    const operator = await signInAs(t, OPERATOR);
    const token = await tokenFor(t, OPERATOR);
    expect((await request(t.app).get('/api/v1/me').set('authorization', `Bearer ${token}`)).status).toBe(200);
    const id = await userId(OPERATOR);

    const res = await admin.agent.post(`/api/v1/users/${id}/deactivate`).set('x-csrf-token', admin.csrf);
    expect(res.status).toBe(200);
    expect(res.body.deactivatedAt).toEqual(expect.any(String));
    expect((await operator.agent.get('/api/v1/me')).status).toBe(401);
    expect((await request(t.app).get('/api/v1/me').set('authorization', `Bearer ${token}`)).status).toBe(401);
    const rows: { revoked_at: Date | null }[] = await t.ds.query('SELECT revoked_at FROM api_token WHERE user_id = $1', [id]);
    expect(rows.every((r) => r.revoked_at)).toBe(true);
    await expect(signInAs(t, OPERATOR)).rejects.toThrow(/callback refused: 401/);
    expect(logLines.some((l) => l.securityEvent === 'saml.refused' && l.reason === 'account-deactivated')).toBe(true);
    const audit: { details: { sessionsEnded: number; tokensRevoked: number } }[] = await t.ds.query(
      "SELECT details FROM audit_event WHERE action = 'user.deactivated' AND entity_id = $1", [id],
    );
    expect(audit).toHaveLength(1);
    expect(audit[0].details.tokensRevoked).toBeGreaterThanOrEqual(1);
    expect(audit[0].details.sessionsEnded).toBeGreaterThanOrEqual(1);

    expect((await admin.agent.post(`/api/v1/users/${id}/reactivate`).set('x-csrf-token', admin.csrf)).body.deactivatedAt).toBeNull();
    const back = await signInAs(t, OPERATOR);
    expect(back.me.email).toBe(OPERATOR);
    expect((await request(t.app).get('/api/v1/me').set('authorization', `Bearer ${token}`)).status).toBe(401);
  });

  it('does not let an administrator deactivate themselves, nor anyone else do it', async () => {
    const admin = await signInAs(t, ADMIN);
    expect((await admin.agent.post(`/api/v1/users/${await userId(ADMIN)}/deactivate`).set('x-csrf-token', admin.csrf)).status).toBe(409);
    const coordinator = await signInAs(t, 'ansel.brandt@geopotential-office.invalid');
    expect((await coordinator.agent.post(`/api/v1/users/${await userId(AUDITOR)}/deactivate`).set('x-csrf-token', coordinator.csrf)).status).toBe(403);
  });
});

describe("everyone's tokens and sessions", () => {
  it('lists any person’s tokens with their owner and revokes one', async () => {
    const admin = await signInAs(t, ADMIN);
    const secret = await tokenFor(t, AUDITOR);
    const list = await admin.agent.get(`/api/v1/admin/tokens?userId=${await userId(AUDITOR)}&active=true`);
    expect(list.status).toBe(200);
    const mine = list.body.items.find((i: { prefix: string }) => secret.startsWith(i.prefix));
    expect(mine.owner.email).toBe(AUDITOR);
    expect(mine.expiresAt).toEqual(expect.any(String));
    expect((await admin.agent.delete(`/api/v1/admin/tokens/${mine.id}`).set('x-csrf-token', admin.csrf)).status).toBe(204);
    expect((await request(t.app).get('/api/v1/me').set('authorization', `Bearer ${secret}`)).status).toBe(401);
    const after = await admin.agent.get(`/api/v1/admin/tokens?userId=${await userId(AUDITOR)}&active=true`);
    expect(after.body.items.find((i: { id: string }) => i.id === mine.id)).toBeUndefined();
  });

  it('lists open sessions without revealing session ids, and ends one', async () => {
    const admin = await signInAs(t, ADMIN);
    const auditor = await signInAs(t, AUDITOR);
    const list = await admin.agent.get(`/api/v1/admin/sessions?userId=${await userId(AUDITOR)}`);
    expect(list.status).toBe(200);
    expect(list.body.total).toBeGreaterThanOrEqual(1);
    const sids: { sid: string }[] = await t.ds.query('SELECT sid FROM "session"');
    for (const s of list.body.items as { id: string; person: { email: string }; signedInAt: string; expiresAt: string }[]) {
      expect(s.person.email).toBe(AUDITOR);
      expect(sids.some((r) => r.sid === s.id)).toBe(false);
      expect(new Date(s.expiresAt).getTime()).toBeGreaterThan(Date.now());
      expect(new Date(s.signedInAt).getTime()).toBeLessThanOrEqual(Date.now());
    }
    for (const s of list.body.items as { id: string }[]) {
      expect((await admin.agent.delete(`/api/v1/admin/sessions/${s.id}`).set('x-csrf-token', admin.csrf)).status).toBe(204);
    }
    expect((await auditor.agent.get('/api/v1/me')).status).toBe(401);
    expect((await admin.agent.get('/api/v1/me')).status).toBe(200);
  });
});

describe('API token expiry', () => {
  it('defaults to 90 days, accepts 1 to 365 days, refuses more, and an expired token stops working', async () => {
    const { agent, csrf } = await signInAs(t, AUDITOR);
    const day = 86_400_000;
    const byDefault = await agent.post('/api/v1/me/tokens').set('x-csrf-token', csrf).send({ name: 'default' });
    expect(byDefault.status).toBe(201);
    expect(Math.round((new Date(byDefault.body.token.expiresAt).getTime() - new Date(byDefault.body.token.createdAt).getTime()) / day)).toBe(90);
    const year = await agent.post('/api/v1/me/tokens').set('x-csrf-token', csrf).send({ name: 'a year', expiresInDays: 365 });
    expect(Math.round((new Date(year.body.token.expiresAt).getTime() - new Date(year.body.token.createdAt).getTime()) / day)).toBe(365);
    const tooLong = await agent.post('/api/v1/me/tokens').set('x-csrf-token', csrf).send({ name: 'forever', expiresInDays: 366 });
    expect(tooLong.status).toBe(400);
    expect(JSON.stringify(tooLong.body.issues)).toContain('expiresInDays');
    const short = await agent.post('/api/v1/me/tokens').set('x-csrf-token', csrf).send({ name: 'short', expiresInDays: 1 });
    const secret = short.body.secret as string;
    expect((await request(t.app).get('/api/v1/me').set('authorization', `Bearer ${secret}`)).status).toBe(200);
    await t.ds.query("UPDATE api_token SET created_at = now() - interval '2 days', expires_at = now() - interval '1 second' WHERE id = $1", [short.body.token.id]);
    expect((await request(t.app).get('/api/v1/me').set('authorization', `Bearer ${secret}`)).status).toBe(401);
    // The database refuses a lifetime over a year whatever the code does.
    await expect(t.ds.query("UPDATE api_token SET expires_at = created_at + interval '400 days' WHERE id = $1", [year.body.token.id])).rejects.toThrow(/api_token_expiry_within_a_year/);
  });
});

describe('who is authoritative for roles', () => {
  it('keeps a role the administrator set even though the identity provider asserts another', async () => {
    const admin = await signInAs(t, ADMIN);
    const id = await userId(AUDITOR);
    const changed = await admin.agent.patch(`/api/v1/users/${id}`).set('x-csrf-token', admin.csrf).send({ role: 'coordinator' });
    expect(changed.status).toBe(200);
    // The local identity provider still asserts role=auditor for Petra Lind.
    const petra = await signInAs(t, AUDITOR);
    expect(petra.me.role).toBe('coordinator');
    const [event]: { details: { assertedRole: string; keptRole: string } }[] = await t.ds.query(
      "SELECT details FROM audit_event WHERE action = 'user.signed-in' AND entity_id = $1 ORDER BY id DESC LIMIT 1", [id],
    );
    expect(event.details).toMatchObject({ assertedRole: 'auditor', keptRole: 'coordinator' });
    expect(logLines.some((l) => l.securityEvent === 'saml.role-differs')).toBe(true);
    await admin.agent.patch(`/api/v1/users/${id}`).set('x-csrf-token', admin.csrf).send({ role: 'auditor' });
  });

  it('takes role and institute from the identity provider at a first sign-in', async () => {
    const agent = request.agent(t.app);
    const login = await agent.get('/auth/saml/login');
    const xml = zlib.inflateRawSync(Buffer.from(new URL(login.headers.location).searchParams.get('SAMLRequest')!, 'base64')).toString();
    const requestId = /ID="([^"]+)"/.exec(xml)![1];
    const response = buildSamlResponse({
      issuer: `${inject('idpUrl')}/metadata`, acsUrl: `${t.config.publicUrl}/auth/saml/callback`, audience: SP_ENTITY_ID, inResponseTo: requestId,
      person: { email: 'noor.askari@saltmarsh-lab.invalid', displayName: 'Noor Askari', instituteCode: 'SCL', role: 'operator' },
      keyPem: fs.readFileSync(inject('idpCertFile').replace('idp-cert.pem', 'idp-key.pem'), 'utf8'), certPem: fs.readFileSync(inject('idpCertFile'), 'utf8'),
    });
    const cb = await agent.post('/auth/saml/callback').type('form').send({ SAMLResponse: Buffer.from(response).toString('base64'), RelayState: '/' });
    expect(cb.status).toBe(303);
    const me = await agent.get('/api/v1/me');
    expect(me.body).toMatchObject({ email: 'noor.askari@saltmarsh-lab.invalid', role: 'operator', institute: { code: 'SCL' } });
  });
});

describe('institutes', () => {
  it('lets the administrator edit an institute (code fixed), audited', async () => {
    const admin = await signInAs(t, ADMIN);
    const list = await admin.agent.get('/api/v1/institutes');
    const inst = list.body.items.find((i: { code: string }) => i.code === 'SCL');
    const res = await admin.agent.patch(`/api/v1/institutes/${inst.id}`).set('x-csrf-token', admin.csrf).send({ city: 'Harbourton' });
    expect(res.status).toBe(200);
    expect(res.body).toMatchObject({ code: 'SCL', name: inst.name, city: 'Harbourton' });
    const rows: { city: string }[] = await t.ds.query('SELECT city FROM institute WHERE id = $1', [inst.id]);
    expect(rows[0].city).toBe('Harbourton');
    const events: unknown[] = await t.ds.query("SELECT 1 FROM audit_event WHERE action = 'institute.updated' AND entity_id = $1", [inst.id]);
    expect(events).toHaveLength(1);
    expect((await admin.agent.patch(`/api/v1/institutes/${inst.id}`).set('x-csrf-token', admin.csrf).send({ code: 'NEW' })).status).toBe(400);
    await admin.agent.patch(`/api/v1/institutes/${inst.id}`).set('x-csrf-token', admin.csrf).send({ city: inst.city });
  });
});
