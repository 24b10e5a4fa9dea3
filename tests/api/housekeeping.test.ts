import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { runHousekeeping, startHousekeeping } from '../../server/maintenance/housekeeping';
import { createTestApp, type TestApp } from '../helpers/test-app';

// Outstanding SAML request ids expire after 10 minutes; expired rows are pruned on every insert and periodically, so
// anonymous sign-in starts cannot grow the table without bound.
let t: TestApp;
beforeAll(async () => {
  t = await createTestApp({ seed: false });
});
afterAll(() => t.close());

const count = async (where = 'true') => ((await t.ds.query(`SELECT count(*)::int AS n FROM saml_request WHERE ${where}`)) as { n: number }[])[0].n;
async function insertExpired(n: number) {
  await t.ds.query(`INSERT INTO saml_request (id, value, created_at) SELECT 'old-' || g || '-' || md5(random()::text), 'x', now() - interval '11 minutes' FROM generate_series(1, $1) g`, [n]);
}

describe('saml_request pruning', () => {
  it('a new sign-in start removes expired request ids and keeps live ones', async () => {
    await t.ds.query("INSERT INTO saml_request (id, value, created_at) VALUES ('live-one', 'x', now() - interval '5 minutes')");
    await insertExpired(500);
    expect(await count("id LIKE 'old-%'")).toBe(500);
    const res = await request(t.app).get('/auth/saml/login?returnTo=/');
    expect(res.status).toBe(302);
    expect(await count("id LIKE 'old-%'")).toBe(0);
    expect(await count("id = 'live-one'")).toBe(1);
    expect(await count("id NOT LIKE 'old-%' AND id <> 'live-one'")).toBe(1); // the request just made
  });

  it('the periodic housekeeping prunes expired request ids and ended rate-limit windows', async () => {
    await insertExpired(50);
    await t.ds.query("INSERT INTO rate_limit (key, points, expire) VALUES ('calc:user:ended', 3, $1), ('calc:user:running', 1, $2)", [Date.now() - 1000, Date.now() + 60_000]);
    const pruned = await runHousekeeping(t.ds);
    expect(pruned).toEqual({ samlRequests: 50, rateLimitCounters: 1, rawFileOrphans: 0 });
    expect(await count("id LIKE 'old-%'")).toBe(0);
    expect(await t.ds.query('SELECT key FROM rate_limit ORDER BY key')).toEqual([{ key: 'calc:user:running' }]);
  });

  it('runs on its interval until stopped', async () => {
    await insertExpired(7);
    const h = startHousekeeping(t.ds, { intervalMs: 50 });
    try {
      for (let i = 0; i < 100 && (await count("id LIKE 'old-%'")) > 0; i++) await new Promise((r) => setTimeout(r, 50));
      expect(await count("id LIKE 'old-%'")).toBe(0);
    } finally {
      await h.stop();
    }
  });
});
