import pg from 'pg';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, inject, it } from 'vitest';
import { UserEntity } from '../../server/db/entities/core.entities';
import { TokenCache, type CachedToken } from '../../server/tokens/token-cache';
import { hashToken, issueToken } from '../../server/tokens/tokens.service';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';

// The per-process cache of resolved API tokens (server/tokens/token-cache.ts): it serves repeated requests without
// reading the token row, and never serves a token or a person that was changed, whichever connection changed it.

let t: TestApp;
let other: pg.Client;
let lookups = 0;
const AUDITOR = 'petra.lind@audit-bureau.invalid';
const ADMIN = 'yusra.holm@geopotential-office.invalid';

beforeAll(async () => {
  t = await createTestApp();
  await t.app.locals.tokenCacheReady;
  // Counts the token lookups (the statement of actorFromToken) the app sends; the statement itself runs as usual.
  const query = t.ds.query.bind(t.ds);
  t.ds.query = (async (sql: string, params?: unknown[], runner?: never) => {
    if (typeof sql === 'string' && sql.includes('FROM api_token t JOIN app_user u')) lookups++;
    return query(sql, params, runner);
  }) as typeof t.ds.query;
  // Changes below are made on a connection of their own, as another process or psql would make them.
  other = new pg.Client({ connectionString: t.databaseUrl });
  await other.connect();
});
afterAll(async () => {
  await other?.end();
  await t.close();
});

const me = (secret: string) => request(t.app).get('/api/v1/me').set('authorization', `Bearer ${secret}`);
const cache = () => t.app.locals.tokenCache as TokenCache;
const idOf = async (email: string) => (await t.ds.getRepository(UserEntity).findOneByOrFail({ email })).id;

/** Polls (bounded) until the condition holds; nothing here measures time. */
async function until(what: string, ok: () => boolean | Promise<boolean>) {
  for (let i = 0; i < 200; i++) {
    if (await ok()) return;
    await new Promise((r) => setTimeout(r, 25));
  }
  throw new Error(`never happened: ${what}`);
}

describe('token cache', () => {
  it('serves repeated requests of a token without reading its row, and says so in /api/health', async () => {
    const secret = await tokenFor(t, AUDITOR);
    const before = lookups;
    expect((await me(secret)).status).toBe(200);
    expect(lookups).toBe(before + 1);
    for (let i = 0; i < 3; i++) {
      const r = await me(secret);
      expect(r.status).toBe(200);
      expect(r.body.email).toBe(AUDITOR);
    }
    expect(lookups).toBe(before + 1);
    expect(cache().size).toBeGreaterThan(0);
    expect((await request(t.app).get('/api/health')).body.tokenCache).toBe('on');
    // A token that does not resolve is never kept: each try reads the database.
    const n = lookups;
    for (let i = 0; i < 2; i++) expect((await me('clv_not-a-token-at-all')).status).toBe(401);
    expect(lookups).toBe(n + 2);
  });

  it('the very next request sees a role, institute, deactivation or revocation changed by another connection', async () => {
    const userId = await idOf(AUDITOR);
    const [{ id: otherInstitute }] = (await other.query("SELECT id FROM institute WHERE code = 'NGCO'")).rows;
    const [{ institute_id: ownInstitute }] = (await other.query('SELECT institute_id FROM app_user WHERE id = $1', [userId])).rows;
    // Repeated, each change right after a cached request: the change must win every time.
    for (let round = 0; round < 15; round++) {
      const secret = await tokenFor(t, AUDITOR);
      expect((await me(secret)).body.role).toBe('auditor');
      const cached = lookups;
      expect((await me(secret)).status).toBe(200);
      expect(lookups).toBe(cached); // served from the cache

      await other.query("UPDATE app_user SET role = 'coordinator' WHERE id = $1", [userId]);
      expect((await me(secret)).body.role).toBe('coordinator');
      await other.query("UPDATE app_user SET role = 'auditor' WHERE id = $1", [userId]);
      expect((await me(secret)).body.role).toBe('auditor');

      await other.query('UPDATE app_user SET institute_id = $2 WHERE id = $1', [userId, otherInstitute]);
      expect((await me(secret)).body.institute.code).toBe('NGCO');
      await other.query('UPDATE app_user SET institute_id = $2 WHERE id = $1', [userId, ownInstitute]);
      expect((await me(secret)).body.institute.code).toBe('IAB');

      await other.query('UPDATE app_user SET deactivated_at = now() WHERE id = $1', [userId]);
      expect((await me(secret)).status).toBe(401);
      await other.query('UPDATE app_user SET deactivated_at = NULL WHERE id = $1', [userId]);
      expect((await me(secret)).status).toBe(200);

      // inside an explicit transaction too: the notification goes out at COMMIT
      await other.query('BEGIN');
      await other.query('UPDATE api_token SET revoked_at = now() WHERE token_hash = $1', [hashToken(secret)]);
      expect((await me(secret)).status).toBe(200); // not committed yet
      await other.query('COMMIT');
      expect((await me(secret)).status).toBe(401);
    }
  });

  it('the last-used stamp a lookup writes does not empty the cache', async () => {
    const secret = await tokenFor(t, AUDITOR);
    expect((await me(secret)).status).toBe(200);
    await other.query("UPDATE api_token SET last_used_at = now() - interval '1 hour' WHERE token_hash = $1", [hashToken(secret)]);
    const n = lookups;
    expect((await me(secret)).status).toBe(200);
    expect(lookups).toBe(n);
  });

  it('changes made through the app reach the next request (role, revocation, deactivation)', async () => {
    const admin = await tokenFor(t, ADMIN);
    const userId = await idOf(AUDITOR);
    const secret = await tokenFor(t, AUDITOR);
    expect((await me(secret)).body.role).toBe('auditor');
    expect((await request(t.app).patch(`/api/v1/users/${userId}`).set('authorization', `Bearer ${admin}`).send({ role: 'coordinator' })).status).toBe(200);
    expect((await me(secret)).body.role).toBe('coordinator');
    expect((await request(t.app).patch(`/api/v1/users/${userId}`).set('authorization', `Bearer ${admin}`).send({ role: 'auditor' })).status).toBe(200);
    expect((await me(secret)).body.role).toBe('auditor');

    const issued = await issueToken(t.ds, userId, 'to revoke', null);
    expect((await me(issued.secret)).status).toBe(200);
    expect((await request(t.app).delete(`/api/v1/admin/tokens/${issued.token.id}`).set('authorization', `Bearer ${admin}`)).status).toBe(204);
    expect((await me(issued.secret)).status).toBe(401);

    expect((await me(secret)).status).toBe(200);
    expect((await request(t.app).post(`/api/v1/users/${userId}/deactivate`).set('authorization', `Bearer ${admin}`)).status).toBe(200);
    expect((await me(secret)).status).toBe(401);
    expect((await request(t.app).post(`/api/v1/users/${userId}/reactivate`).set('authorization', `Bearer ${admin}`)).status).toBe(200);
    // reactivation does not revive the tokens deactivation revoked
    expect((await me(secret)).status).toBe(401);
  });

  it('is off and empty while the listening connection is lost, reads the database meanwhile, and is back once it listens again', async () => {
    const secret = await tokenFor(t, AUDITOR);
    expect((await me(secret)).status).toBe(200);
    expect(cache().size).toBeGreaterThan(0);
    const admin = new pg.Client({ connectionString: inject('pgAdminUrl') });
    await admin.connect();
    try {
      const db = (await other.query('SELECT current_database() AS db')).rows[0].db;
      const killed = await admin.query(
        "SELECT pg_terminate_backend(pid) AS ok FROM pg_stat_activity WHERE application_name = 'chronolevel-token-cache' AND datname = $1", [db],
      );
      expect(killed.rows.length).toBe(1);
      await until('cache off', () => !cache().enabled);
      expect(cache().size).toBe(0);
      // Meanwhile every request reads the database and nothing is stored.
      const n = lookups;
      expect((await me(secret)).status).toBe(200);
      if (!cache().enabled) {
        expect(lookups).toBe(n + 1);
        expect(cache().size).toBe(0);
      }
      await until('cache on again', () => cache().enabled);
      expect((await request(t.app).get('/api/health')).body.tokenCache).toBe('on');
      expect((await me(secret)).status).toBe(200);
      const m = lookups;
      expect((await me(secret)).status).toBe(200);
      expect(lookups).toBe(m);
      await other.query('UPDATE api_token SET revoked_at = now() WHERE token_hash = $1', [hashToken(secret)]);
      expect((await me(secret)).status).toBe(401);
    } finally {
      await admin.end();
    }
  });
});

describe('TokenCache on a listening connection of its own', () => {
  const entry = (tokenId: string, userId: string, at: number, expiresAt = at + 3_600_000): CachedToken => ({
    tokenId, actor: { userId, email: 'x@example.invalid', displayName: 'X', role: 'auditor', instituteId: null, via: 'token' }, expiresAt, lastUsedAt: at, storedAt: at,
  });

  it('keeps at most maxEntries (least recently used out first) and nothing older than maxAgeMs or past its expiry', async () => {
    const c = new TokenCache({ connectionString: t.databaseUrl, maxEntries: 3, maxAgeMs: 30_000 });
    await c.start();
    try {
      expect(c.enabled).toBe(true);
      const now = Date.now();
      for (const k of ['a', 'b', 'c']) expect(c.put(k, entry(`t-${k}`, 'u1', now), c.mark())).toBe(true);
      expect(await c.get('a')).not.toBeNull(); // a is now the most recently used
      c.put('d', entry('t-d', 'u1', now), c.mark());
      expect(c.size).toBe(3);
      expect(await c.get('b')).toBeNull(); // the least recently used went out
      expect(await c.get('a')).not.toBeNull();
      expect(await c.get('c', () => now + 30_001)).toBeNull(); // too old
      c.put('e', entry('t-e', 'u1', now, now + 1000), c.mark());
      expect(await c.get('e', () => now + 999)).not.toBeNull();
      expect(await c.get('e', () => now + 1000)).toBeNull(); // expired by its cached expires_at
    } finally {
      await c.stop();
    }
  });

  it('does not store a lookup that overlapped a drop, and drops by token, by person and all at once', async () => {
    const c = new TokenCache({ connectionString: t.databaseUrl });
    await c.start();
    try {
      const now = Date.now();
      const mark = c.mark();
      c.dropUser('someone-else'); // a change committed while the lookup ran
      expect(c.put('a', entry('t-a', 'u1', now), mark)).toBe(false);
      expect(c.size).toBe(0);
      c.put('a', entry('t-a', 'u1', now), c.mark());
      c.put('b', entry('t-b', 'u1', now), c.mark());
      c.put('c', entry('t-c', 'u2', now), c.mark());
      c.applyNotification('t:t-c');
      expect(await c.get('c')).toBeNull();
      c.applyNotification('u:u1');
      expect(c.size).toBe(0);
      c.put('a', entry('t-a', 'u1', now), c.mark());
      c.applyNotification('*');
      expect(c.size).toBe(0);
    } finally {
      await c.stop();
    }
    expect(c.enabled).toBe(false);
    expect(c.put('a', entry('t-a', 'u1', Date.now()), c.mark())).toBe(false); // off: nothing is stored
  });

  it('hears the triggers: a committed change of a token row drops it, a rolled-back one does not', async () => {
    const c = new TokenCache({ connectionString: t.databaseUrl });
    await c.start();
    const owner = new pg.Client({ connectionString: t.ownerUrl });
    await owner.connect();
    try {
      const [{ id }] = (await owner.query('SELECT id FROM api_token ORDER BY created_at LIMIT 1')).rows;
      c.put('x', entry(id, 'u9', Date.now()), c.mark());
      c.put('a', entry('t-a', 'u1', Date.now()), c.mark());
      // A rolled-back change announces nothing (notifications go out at commit only).
      await owner.query('BEGIN');
      await owner.query('UPDATE api_token SET revoked_at = now() WHERE id = $1', [id]);
      await owner.query('ROLLBACK');
      expect(await c.get('x')).not.toBeNull();
      // A committed one does, for that token only.
      await owner.query("UPDATE api_token SET expires_at = expires_at - interval '1 minute' WHERE id = $1", [id]);
      expect(await c.get('x')).toBeNull();
      expect(await c.get('a')).not.toBeNull();
    } finally {
      await owner.end();
      await c.stop();
    }
  });
});
