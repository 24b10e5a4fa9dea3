import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';

// Hot reads are named prepared statements (server/db/prepared.ts), and PostgreSQL keeps every one a connection has
// prepared until the connection ends. What a caller chooses (page, page size, sort, filters) must therefore pick
// among a bounded set of statement texts; otherwise one client varying a number grows every pooled backend's memory
// without limit. Two pooled connections, so that the check below sees both.

let t: TestApp;
let token = '';
const PREPARED = "SELECT count(*)::int AS n FROM pg_prepared_statements WHERE name LIKE 'cl\\_%'";

beforeAll(async () => {
  t = await createTestApp({ env: { DB_POOL_MAX: '2' } });
  token = await tokenFor(t, 'ansel.brandt@geopotential-office.invalid');
});
afterAll(async () => {
  await t.close();
});

/** The most statements prepared on either pooled connection (both held at once, so each answers for itself). */
async function mostPrepared(): Promise<number> {
  const runners = [t.ds.createQueryRunner(), t.ds.createQueryRunner()];
  try {
    const counts = await Promise.all(runners.map(async (r) => (await r.query(PREPARED))[0].n as number));
    return Math.max(...counts);
  } finally {
    await Promise.all(runners.map((r) => r.release()));
  }
}

describe('prepared statements stay bounded whatever the caller asks for', () => {
  it('campaign list: 120 page sizes and 30 pages prepare a handful of statements', async () => {
    const before = await mostPrepared();
    for (let size = 1; size <= 120; size++) {
      const res = await request(t.app).get(`/api/v1/campaigns?page=1&pageSize=${size}`).set('authorization', `Bearer ${token}`);
      expect(res.status).toBe(200);
    }
    for (let page = 2; page <= 31; page++) {
      const res = await request(t.app).get(`/api/v1/campaigns?page=${page}&pageSize=3`).set('authorization', `Bearer ${token}`);
      expect(res.status).toBe(200);
    }
    const after = await mostPrepared();
    expect(after).toBeGreaterThan(before); // the list is prepared at all
    expect(after - before).toBeLessThanOrEqual(8);
  });
});
