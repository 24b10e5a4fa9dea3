import pg from 'pg';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { scaleDemo } from '../../seeds/scale.seed';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';

// campaign_tally (migration CampaignTally) holds the number of campaigns per (institute, partner institute, state),
// kept by statement triggers, and the campaign list's total is read from it. After every kind of write — one row,
// many rows in one statement, a move between groups, a delete, TRUNCATE, a rolled-back transaction, concurrent
// transactions — it must equal a plain GROUP BY over the campaigns, and the list's total must equal a plain count.

let t: TestApp;
let owner: pg.Client;
let other: pg.Client;
let coordToken = '';

type Group = { institute_id: string; partner_institute_id: string | null; state: string; n: number };
const key = (g: Group) => `${g.institute_id}|${g.partner_institute_id ?? '-'}|${g.state}`;

type Run = (sql: string) => Promise<Group[]>;
const viaApp: Run = (sql) => t.ds.query(sql);
const via = (c: pg.ClientBase): Run => async (sql) => (await c.query(sql)).rows;

async function tallyAndTruth(run: Run = viaApp) {
  const tally = await run('SELECT institute_id, partner_institute_id, state, n::int AS n FROM campaign_tally WHERE n <> 0');
  const truth = await run('SELECT institute_id, partner_institute_id, state, count(*)::int AS n FROM campaign GROUP BY 1, 2, 3');
  const asMap = (gs: Group[]) => new Map(gs.map((g) => [key(g), g.n]));
  return { tally: asMap(tally), truth: asMap(truth) };
}

async function expectExact(run: Run = viaApp) {
  const { tally, truth } = await tallyAndTruth(run);
  expect(truth.size).toBeGreaterThan(0);
  expect(tally).toEqual(truth);
}

async function listTotal(query = '') {
  const res = await request(t.app).get(`/api/v1/campaigns?pageSize=1${query}`).set('authorization', `Bearer ${coordToken}`);
  expect(res.status).toBe(200);
  return res.body.total as number;
}

beforeAll(async () => {
  t = await createTestApp();
  await scaleDemo(t.ds, { institutes: 5, people: 20, campaigns: 120, benchmarks: 0, sections: 0 });
  coordToken = await tokenFor(t, 'ansel.brandt@geopotential-office.invalid');
  owner = new pg.Client({ connectionString: t.ownerUrl });
  other = new pg.Client({ connectionString: t.databaseUrl });
  await owner.connect();
  await other.connect();
});
afterAll(async () => {
  await owner?.end();
  await other?.end();
  await t.close();
});

describe('campaign tally', () => {
  it('matches the campaigns after the demo seed and a bulk insert (one statement, many groups)', async () => {
    await expectExact();
  });

  it('follows a state change of many rows in one statement, an update that moves nothing, and the list total follows', async () => {
    const before = await listTotal('&state=accepted');
    const [{ n }] = await t.ds.query(`SELECT count(*)::int AS n FROM campaign WHERE state = 'submitted'`);
    expect(n).toBeGreaterThan(1);
    await t.ds.query(`UPDATE campaign SET state = 'accepted' WHERE state = 'submitted'`);
    await expectExact();
    expect(await listTotal('&state=accepted')).toBe(before + n);
    expect(await listTotal('&state=submitted')).toBe(0);
    // an edit that leaves institute, partner and state as they were
    await t.ds.query(`UPDATE campaign SET updated_at = now(), name = name || ' '`);
    await expectExact();
  });

  it('follows a move between institutes and partner institutes, and deletes', async () => {
    const [a, b] = await t.ds.query(`SELECT id FROM institute ORDER BY code LIMIT 2`);
    await t.ds.query(`UPDATE campaign SET institute_id = $1 WHERE id IN (SELECT id FROM campaign WHERE institute_id = $2 ORDER BY id LIMIT 3)`, [a.id, b.id]);
    await t.ds.query(`UPDATE campaign SET partner_institute_id = NULL WHERE id IN (SELECT id FROM campaign ORDER BY id LIMIT 2)`);
    await expectExact();
    // a campaign nothing else refers to: remove what refers to a few, then the campaigns
    const gone = await t.ds.query(`SELECT c.id FROM campaign c WHERE NOT EXISTS (SELECT 1 FROM ratio_series s WHERE s.campaign_id = c.id)
      AND NOT EXISTS (SELECT 1 FROM campaign_event e WHERE e.campaign_id = c.id) AND NOT EXISTS (SELECT 1 FROM comparison_result r WHERE r.campaign_id = c.id)
      AND NOT EXISTS (SELECT 1 FROM calibration_chain k WHERE c.id IN (k.before_campaign_id, k.after_campaign_id, k.remote_campaign_id))
      AND NOT EXISTS (SELECT 1 FROM certificate_request q WHERE q.campaign_id = c.id) AND NOT EXISTS (SELECT 1 FROM result_request q WHERE q.campaign_id = c.id)
      AND NOT EXISTS (SELECT 1 FROM ratio_closure_campaign q WHERE q.campaign_id = c.id) ORDER BY c.id LIMIT 4`);
    expect(gone.length).toBe(4);
    const total = await listTotal();
    const visible = await t.ds.query(`SELECT count(*)::int AS n FROM campaign WHERE id = ANY($1) AND state <> 'draft'`, [gone.map((g: { id: string }) => g.id)]);
    await t.ds.query(`DELETE FROM campaign WHERE id = ANY($1)`, [gone.map((g: { id: string }) => g.id)]);
    await expectExact();
    expect(await listTotal()).toBe(total - visible[0].n);
    const [{ n }] = await t.ds.query(`SELECT count(*)::int AS n FROM campaign WHERE state <> 'draft'`);
    expect(await listTotal()).toBe(n);
  });

  it('a rolled-back write leaves the tally as it was; TRUNCATE empties it', async () => {
    const { tally: before } = await tallyAndTruth();
    await owner.query('BEGIN');
    await owner.query(`UPDATE campaign SET state = 'returned' WHERE state = 'accepted'`);
    await expectExact(via(owner));
    // The registry's own guards refuse to lose certificates with their campaigns; inside this rolled-back
    // transaction they are switched off so that TRUNCATE … CASCADE can reach the campaigns at all.
    await owner.query(`DO $$ DECLARE r record; BEGIN
      FOR r IN SELECT relname FROM pg_class WHERE relkind = 'r' AND relnamespace = 'public'::regnamespace AND relname <> 'campaign' LOOP
        EXECUTE format('ALTER TABLE %I DISABLE TRIGGER USER', r.relname);
      END LOOP; END $$`);
    await owner.query('TRUNCATE campaign CASCADE');
    const { rows } = await owner.query('SELECT count(*)::int AS n FROM campaign_tally');
    expect(rows[0].n).toBe(0);
    await owner.query('ROLLBACK');
    const { tally: after } = await tallyAndTruth();
    expect(after).toEqual(before);
    await expectExact();
  });

  it('stays exact when two transactions change campaigns of the same groups at once', async () => {
    const ids: { id: string }[] = await t.ds.query(`SELECT id FROM campaign WHERE state = 'accepted' ORDER BY id LIMIT 10`);
    expect(ids.length).toBe(10);
    const first = ids.slice(0, 5).map((r) => r.id);
    const second = ids.slice(5).map((r) => r.id);
    const mine = await t.ds.createQueryRunner();
    await mine.connect();
    try {
      await mine.startTransaction();
      await other.query('BEGIN');
      await mine.query(`UPDATE campaign SET state = 'in_review' WHERE id = ANY($1)`, [first]);
      // the other transaction waits on the same tally rows until the first commits
      const waiting = other.query(`UPDATE campaign SET state = 'in_review' WHERE id = ANY($1)`, [second]).then(() => other.query('COMMIT'));
      await new Promise((r) => setTimeout(r, 100));
      await mine.commitTransaction();
      await waiting;
    } finally {
      await mine.release();
    }
    await expectExact();
  });
});
