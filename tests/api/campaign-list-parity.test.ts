import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Actor } from '../../server/auth/actor';
import { canSeeCampaign } from '../../server/auth/campaign-scope';
import { UserEntity } from '../../server/db/entities/core.entities';
import { scaleDemo } from '../../seeds/scale.seed';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';

// The campaign list answers exactly what the visibility rule and the detail route say, whatever SQL it uses:
// - the ids of all pages together are the campaigns canSeeCampaign() lets the caller see (rule evaluated in
//   TypeScript over the plain rows), and `total` is their number;
// - every item equals the summary part of the campaign's detail answer (which loads the campaign with all its joins);
// - each sort and order gives the rows in the order of the column (ties by id), with the state and text filters.

let t: TestApp;
const people = {
  coord: 'ansel.brandt@geopotential-office.invalid',
  auditor: 'petra.lind@audit-bureau.invalid',
  scl: 'ines.varga@saltmarsh-lab.invalid',
  hmo: 'mira.ostrowe@highridge-obs.invalid',
  scaledOp: 'person1@scaled-copy.invalid',
};
type Who = keyof typeof people;
const tok = new Map<Who, string>();
const actors = new Map<Who, Actor>();
type Plain = { id: string; name: string; state: string; institute_id: string; partner: string | null; inst_code: string; ca_name: string; cb_name: string; updated_at: Date; period_start: Date; period_end: Date };
let all: Plain[] = [];

beforeAll(async () => {
  t = await createTestApp();
  await scaleDemo(t.ds, { institutes: 6, people: 30, campaigns: 160, benchmarks: 0, sections: 0 });
  for (const [k, email] of Object.entries(people) as [Who, string][]) {
    tok.set(k, await tokenFor(t, email));
    const u = await t.ds.getRepository(UserEntity).findOneByOrFail({ email });
    actors.set(k, { userId: u.id, email: u.email, displayName: u.displayName, role: u.role, instituteId: u.instituteId, via: 'token' });
  }
  all = await t.ds.query(`SELECT c.id, c.name, c.state, c.institute_id, cb.institute_id AS partner, i.code AS inst_code, ca.name AS ca_name, cb.name AS cb_name,
                                 c.updated_at, c.period_start, c.period_end
                            FROM campaign c JOIN institute i ON i.id = c.institute_id JOIN clock ca ON ca.id = c.clock_a_id JOIN clock cb ON cb.id = c.clock_b_id`);
});
afterAll(() => t.close());

const get = (who: Who, url: string) => request(t.app).get(url).set('authorization', `Bearer ${tok.get(who)}`);
const visible = (who: Who) => all.filter((c) => canSeeCampaign(actors.get(who)!, { state: c.state, instituteId: c.institute_id, partnerInstituteId: c.partner }));

async function everyPage(who: Who, query: string) {
  const items: { id: string }[] = [];
  let total = -1;
  for (let page = 1; page < 100; page++) {
    const res = await get(who, `/api/v1/campaigns?${query}&page=${page}&pageSize=37`);
    expect(res.status, res.text.slice(0, 200)).toBe(200);
    expect(res.body.page).toBe(page);
    expect(res.body.pageSize).toBe(37);
    total = res.body.total;
    items.push(...res.body.items);
    if (res.body.items.length < 37) break;
  }
  return { items, total };
}

const summaryKeys = ['id', 'name', 'state', 'institute', 'clockA', 'clockB', 'link', 'periodStart', 'periodEnd', 'role', 'siteA', 'siteB', 'updatedAt'] as const;

describe('campaign list against the visibility rule and the detail route', () => {
  it.each(Object.keys(people) as Who[])('%s: all pages together are exactly the visible campaigns, total is their number', async (who) => {
    const expected = visible(who).map((c) => c.id).sort();
    expect(expected.length).toBeGreaterThan(0);
    const { items, total } = await everyPage(who, 'sort=updatedAt&order=desc');
    expect(items.map((i) => i.id).sort()).toEqual(expected);
    expect(total).toBe(expected.length);
  });

  it.each(['coord', 'scl', 'hmo'] as Who[])('%s: every item of the first page equals the summary part of its detail answer', async (who) => {
    const res = await get(who, '/api/v1/campaigns?sort=name&order=asc&pageSize=40');
    expect(res.status).toBe(200);
    expect(res.body.items.length).toBeGreaterThan(0);
    for (const item of res.body.items) {
      const d = await get(who, `/api/v1/campaigns/${item.id}`);
      expect(d.status).toBe(200);
      expect(Object.keys(item).sort()).toEqual([...summaryKeys].sort());
      expect(item).toEqual(Object.fromEntries(summaryKeys.map((k) => [k, d.body[k]])));
    }
  });

  const columns = new Map<string, (c: Plain) => string | number>([
    ['name', (c) => c.name],
    ['state', (c) => c.state],
    ['periodStart', (c) => c.period_start.getTime()],
    ['periodEnd', (c) => c.period_end.getTime()],
    ['updatedAt', (c) => c.updated_at.getTime()],
    ['institute', (c) => c.inst_code],
  ]);
  // PostgreSQL compares text by the database collation (C.UTF-8 in the test cluster: code-point order), ids as uuids
  // (byte order of the hex text), so plain JavaScript comparisons give the same order here.
  const cmp = (a: string | number, b: string | number) => (a < b ? -1 : a > b ? 1 : 0);

  it.each([...columns.keys()].flatMap((s) => (['asc', 'desc'] as const).map((o) => [s, o] as const)))('coordinator, sort=%s order=%s: rows in column order, ties by id', async (sort, order) => {
    const key = columns.get(sort)!;
    const expected = visible('coord')
      .slice()
      .sort((a, b) => (order === 'asc' ? cmp(key(a), key(b)) : cmp(key(b), key(a))) || cmp(a.id, b.id))
      .map((c) => c.id);
    const { items } = await everyPage('coord', `sort=${sort}&order=${order}`);
    expect(items.map((i) => i.id)).toEqual(expected);
  });

  it('state and text filters keep the scope and count what they keep', async () => {
    const byState = await everyPage('scl', 'state=draft&sort=name');
    const drafts = visible('scl').filter((c) => c.state === 'draft');
    expect(byState.items.map((i) => i.id).sort()).toEqual(drafts.map((c) => c.id).sort());
    expect(byState.total).toBe(drafts.length);

    // ILIKE '%…%' over the campaign's name, both clocks' names and the institute code.
    const needle = 'sr1';
    const hits = visible('coord').filter((c) => [c.name, c.ca_name, c.cb_name, c.inst_code].some((s) => s.toLowerCase().includes(needle)));
    expect(hits.length).toBeGreaterThan(0);
    const byText = await everyPage('coord', `q=${needle.toUpperCase()}&sort=name`);
    expect(byText.items.map((i) => i.id).sort()).toEqual(hits.map((c) => c.id).sort());
    expect(byText.total).toBe(hits.length);

    const none = await get('scaledOp', '/api/v1/campaigns?q=nothing-matches-this');
    expect(none.body).toEqual({ items: [], total: 0, page: 1, pageSize: 25 });
  });

  it('lab staff of clock B see the campaign when clock B is changed or moves to their institute (partner institute kept by triggers)', async () => {
    const [{ id: campaignId, clock_b_id: clockB }] = await t.ds.query(
      `SELECT c.id, c.clock_b_id FROM campaign c JOIN institute i ON i.id = c.institute_id WHERE i.code LIKE 'S%-X' ORDER BY c.name LIMIT 1`,
    );
    const sclInstitute = actors.get('scl')!.instituteId;
    const seen = async () => (await everyPage('scl', 'sort=name')).items.some((i) => i.id === campaignId);
    expect(await seen()).toBe(false);
    // the clock moves to the SCL institute: its campaigns follow
    const [{ institute_id: before }] = await t.ds.query('SELECT institute_id FROM clock WHERE id = $1', [clockB]);
    await t.ds.query('UPDATE clock SET institute_id = $1 WHERE id = $2', [sclInstitute, clockB]);
    expect(await seen()).toBe(true);
    expect((await get('scl', `/api/v1/campaigns/${campaignId}`)).status).toBe(200);
    await t.ds.query('UPDATE clock SET institute_id = $1 WHERE id = $2', [before, clockB]);
    expect(await seen()).toBe(false);
    // clock B replaced by an SCL clock, and a stray write to the derived column is overwritten
    const [{ id: sclClock }] = await t.ds.query('SELECT id FROM clock WHERE institute_id = $1 ORDER BY name LIMIT 1', [sclInstitute]);
    await t.ds.query('UPDATE campaign SET clock_b_id = $1 WHERE id = $2', [sclClock, campaignId]);
    expect(await seen()).toBe(true);
    await t.ds.query('UPDATE campaign SET partner_institute_id = $1 WHERE id = $2', [before, campaignId]);
    expect((await t.ds.query('SELECT partner_institute_id AS p FROM campaign WHERE id = $1', [campaignId]))[0].p).toBe(sclInstitute);
    expect(await seen()).toBe(true);
  });
});
