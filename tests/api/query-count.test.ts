import request from 'supertest';
import { PostgresQueryRunner } from 'typeorm/driver/postgres/PostgresQueryRunner.js';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { scaleDemo } from '../../seeds/scale.seed';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';

// A list answers with a bounded number of SQL statements whatever its page size (no query per row). Every statement
// TypeORM sends goes through PostgresQueryRunner.query; the test counts the calls around one request.

let t: TestApp;
const tok: Record<string, string> = {};
let counting = false;
let statements = 0;
// Rounds: statements that started while none of the request's statements was running (one waits for the other);
// statements sent together while others are in flight share a round.
let inFlight = 0;
let rounds = 0;
const original = PostgresQueryRunner.prototype.query;

beforeAll(async () => {
  t = await createTestApp();
  // A scaled-up copy of the demo, so pages are full at every size asked for below.
  await scaleDemo(t.ds, { institutes: 8, people: 40, campaigns: 400, benchmarks: 300, sections: 400 });
  tok.coord = await tokenFor(t, 'ansel.brandt@geopotential-office.invalid');
  tok.op = await tokenFor(t, 'person1@scaled-copy.invalid');
  PostgresQueryRunner.prototype.query = function (this: PostgresQueryRunner, ...args: Parameters<typeof original>) {
    if (!counting) return original.apply(this, args);
    statements++;
    if (inFlight++ === 0) rounds++;
    return original.apply(this, args).finally(() => inFlight--);
  } as typeof original;
});
afterAll(async () => {
  PostgresQueryRunner.prototype.query = original;
  await t.close();
});

async function statementsFor(url: string, who: 'coord' | 'op') {
  // Warm once so one-time work (token last-used stamp, metadata) is not counted.
  await request(t.app).get(url).set('authorization', `Bearer ${tok[who]}`);
  statements = 0;
  rounds = 0;
  counting = true;
  const res = await request(t.app).get(url).set('authorization', `Bearer ${tok[who]}`);
  counting = false;
  expect(res.status, `${url}: ${res.text.slice(0, 200)}`).toBe(200);
  return { n: statements, rounds, items: (res.body.items ?? []).length as number };
}

const lists = ['/api/v1/campaigns', '/api/v1/sites', '/api/v1/clocks', '/api/v1/network/benchmarks', '/api/v1/network/sections', '/api/v1/certificates'];

describe('SQL statements per list request', () => {
  for (const list of lists) {
    it(`${list}: at most 6 at page size 5 and 100`, async () => {
      const small = await statementsFor(`${list}?page=1&pageSize=5`, 'coord');
      const large = await statementsFor(`${list}?page=1&pageSize=100`, 'coord');
      // A query per row would add 95 statements; TypeORM's paging may add or skip one sub-select by page fill.
      expect(Math.abs(large.n - small.n)).toBeLessThanOrEqual(1);
      expect(Math.max(large.n, small.n)).toBeLessThanOrEqual(6);
      expect(small.n).toBeGreaterThan(0);
      if (list !== '/api/v1/certificates') expect(large.items).toBeGreaterThan(small.items);
    });
  }

  it('an operator’s campaign list (scoped to the institute) is bounded the same way', async () => {
    const small = await statementsFor('/api/v1/campaigns?page=1&pageSize=5', 'op');
    const large = await statementsFor('/api/v1/campaigns?page=1&pageSize=100', 'op');
    expect(large.n).toBe(small.n);
    expect(large.items).toBeGreaterThan(small.items);
  });
});

describe('SQL round trips of a campaign detail', () => {
  it('reads the campaign with its clocks, link, budgets, result, timeline and closures in one statement', async () => {
    const [{ id }] = await t.ds.query(
      "SELECT c.id FROM campaign c JOIN app_user u ON u.institute_id = c.institute_id WHERE u.email = 'person1@scaled-copy.invalid' ORDER BY c.name LIMIT 1",
    );
    for (const who of ['op', 'coord'] as const) {
      // the token is cached after the warm-up request, so its lookup sends no statement
      const detail = await statementsFor(`/api/v1/campaigns/${id}`, who);
      expect(detail.n).toBe(1);
      expect(detail.rounds).toBe(1);
    }
  });
});
