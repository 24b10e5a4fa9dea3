import Decimal from 'decimal.js';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Actor } from '../../server/auth/actor';
import { getCampaignForResult, markCampaignCertified } from '../../server/campaigns/campaigns.service';
import { UserEntity } from '../../server/db/entities/core.entities';
import { acceptAsReviewer } from '../helpers/accepted-campaign';
import { caughtMail, createTestApp, tokenFor, type TestApp } from '../helpers/test-app';

// Campaign API: creation with pinned budgets and the default reference ratio, institute scoping, the review
// state machine (illegal transitions 409), the submit e-mail through the outbox, and the functions other features call.

let t: TestApp;
const tok: Record<string, string> = {};
const people = {
  scl: 'ines.varga@saltmarsh-lab.invalid',
  hmo: 'mira.ostrowe@highridge-obs.invalid',
  coord: 'ansel.brandt@geopotential-office.invalid',
  auditor: 'petra.lind@audit-bureau.invalid',
};
let ids: Record<string, string> = {};
beforeAll(async () => {
  t = await createTestApp();
  for (const [k, email] of Object.entries(people)) tok[k] = await tokenFor(t, email);
  const rows: { name: string; id: string }[] = await t.ds.query(
    "SELECT name, id FROM clock UNION ALL SELECT name, id FROM fibre_link UNION ALL SELECT name, id FROM campaign",
  );
  ids = Object.fromEntries(rows.map((r) => [r.name, r.id]));
});
afterAll(() => t.close());

const as = (who: keyof typeof people) => ({
  get: (url: string) => request(t.app).get(url).set('authorization', `Bearer ${tok[who]}`),
  post: (url: string, body: object = {}) => request(t.app).post(url).set('authorization', `Bearer ${tok[who]}`).send(body),
  patch: (url: string, body: object) => request(t.app).patch(url).set('authorization', `Bearer ${tok[who]}`).send(body),
});
const paths = (res: request.Response) => (res.body.issues ?? []).map((i: { path: string }) => i.path);
async function actorOf(email: string): Promise<Actor> {
  const u = await t.ds.getRepository(UserEntity).findOneByOrFail({ email });
  return { userId: u.id, email: u.email, displayName: u.displayName, role: u.role, instituteId: u.instituteId, via: 'token' };
}

const newCampaign = (name: string) => ({
  name,
  clockAId: ids['SCL-Sr1'],
  clockBId: ids['HMO-Sr2'],
  linkId: ids['SCL–HMO long-haul'],
  periodStart: '2027-02-01T00:00:00Z',
  periodEnd: '2027-02-15T00:00:00Z',
  operatorNotes: 'test run',
});

describe('the demo scenario', () => {
  it('holds campaigns in every state (five accepted, three of them of the transportable clock; the certificate seeder may have certified one)', async () => {
    const rows: { state: string; n: number }[] = await t.ds.query('SELECT state, count(*)::int AS n FROM campaign GROUP BY state');
    const by: Record<string, number> = Object.fromEntries(rows.map((r) => [r.state, r.n]));
    expect(by).toMatchObject({ draft: 2, submitted: 1, in_review: 3, returned: 1 }); // in review: HMO local October and the two other sides of its loop
    expect((by.accepted ?? 0) + (by.certified ?? 0)).toBe(5);
  });
});

describe('audit trail of campaigns', () => {
  type Ev = { action: string; at: string; entityType: string; entityId: string; actorLabel: string };
  const trail = async (id: string): Promise<Ev[]> => {
    const res = await as('auditor').get(`/api/v1/audit-events?entityType=campaign&entityId=${id}&pageSize=100`);
    expect(res.status).toBe(200);
    return [...res.body.items].reverse(); // the API lists newest first
  };

  it('the seeded spring run has one audit event per timeline step, same actions and times as the service would record', async () => {
    const id = ids['SCL–HMO Sr spring run 2026'];
    const events = (await trail(id)).filter((e) => e.action.startsWith('campaign.') && e.action !== 'campaign.certified'); // later seeders add result/certificate steps
    expect(events.map((e) => e.action)).toEqual(['campaign.created', 'campaign.submitted', 'campaign.in_review', 'campaign.accepted']);
    const timeline = (await as('coord').get(`/api/v1/campaigns/${id}`)).body.timeline.slice(0, 4);
    expect(events.map((e) => e.at)).toEqual(timeline.map((e: { at: string }) => e.at));
    expect(events[0].actorLabel).toMatch(/^Ines Varga </);
    expect(events[3].actorLabel).toMatch(/^Ansel Brandt </);
    const [camp] = await t.ds.query('SELECT created_at FROM campaign WHERE id = $1', [id]);
    expect(new Date(camp.created_at).toISOString()).toBe(timeline[0].at);
  });

  it('create → submit → start-review → accept through the API lists all four events', async () => {
    const id = (await as('scl').post('/api/v1/campaigns', newCampaign('Audit trail check 91c2'))).body.id;
    expect((await as('scl').post(`/api/v1/campaigns/${id}/submit`)).status).toBe(200);
    expect((await as('coord').post(`/api/v1/campaigns/${id}/start-review`)).status).toBe(200);
    await acceptAsReviewer(t, id, tok.coord);
    const events = (await trail(id)).filter((e) => !e.action.startsWith('campaign.checklist'));
    expect(events.map((e) => e.action)).toEqual(['campaign.created', 'campaign.submitted', 'campaign.in_review', 'campaign.accepted']);
    expect(events.every((e) => e.entityType === 'campaign' && e.entityId === id)).toBe(true);
  });
});

describe('creating and editing', () => {
  let id = '';
  it('opens a draft with budgets pinned to the current versions and ratio 1 for the same species', async () => {
    const res = await as('scl').post('/api/v1/campaigns', newCampaign('Test campaign one'));
    expect(res.status).toBe(201);
    id = res.body.id;
    expect(res.body).toMatchObject({ state: 'draft', institute: { code: 'SCL' }, referenceRatio: { value: '1', relativeUncertainty: 0, isDefault: true } });
    expect(res.body.budgetA.version).toBe(1);
    expect(res.body.budgetB.version).toBe(2);
    expect(res.body.timeline).toHaveLength(1);
    const [row] = await t.ds.query('SELECT state, reference_ratio, institute_id FROM campaign WHERE id = $1', [id]);
    expect(row).toMatchObject({ state: 'draft', reference_ratio: '1' });
    const audit = await t.ds.query("SELECT action FROM audit_event WHERE entity_type = 'campaign' AND entity_id = $1", [id]);
    expect(audit.map((a: { action: string }) => a.action)).toEqual(['campaign.created']);
  });

  it('validates with field paths: period order, link joining the clocks, ratio override needs a justification', async () => {
    const r1 = await as('scl').post('/api/v1/campaigns', { ...newCampaign('Bad'), periodEnd: '2027-01-01T00:00:00Z', clockBId: 'nope' });
    expect(r1.status).toBe(400);
    expect(paths(r1)).toEqual(expect.arrayContaining(['body.clockBId']));
    const r2 = await as('scl').post('/api/v1/campaigns', { ...newCampaign('Bad'), periodEnd: '2027-01-01T00:00:00Z' });
    expect(paths(r2)).toEqual(['body.periodEnd']);
    const r3 = await as('scl').post('/api/v1/campaigns', { ...newCampaign('Bad'), linkId: ids['HMO local'] });
    expect(r3.status).toBe(400);
    expect(paths(r3)).toEqual(['body.linkId']);
    const r4 = await as('scl').post('/api/v1/campaigns', { ...newCampaign('Bad'), referenceRatio: { value: 1.5, relativeUncertainty: 1e-17, justification: '' } });
    expect(paths(r4)).toEqual(expect.arrayContaining(['body.referenceRatio.value', 'body.referenceRatio.justification']));
  });

  it('clock A decides the owner: an SCL operator cannot open a campaign with an HMO clock as A', async () => {
    const res = await as('scl').post('/api/v1/campaigns', { ...newCampaign('Foreign A'), clockAId: ids['HMO-Sr2'], clockBId: ids['SCL-Sr1'] });
    expect(res.status).toBe(403);
  });

  it('a new budget version does not move the pinned one until the lab re-pins it while draft', async () => {
    await as('scl').post(`/api/v1/clocks/${ids['SCL-Sr1']}/budget-versions`, { rows: [{ effect: 'Blackbody radiation', correction: 4.96e-15, uncertainty: 1e-18, type: 'B', note: '' }], comment: 'test' });
    const before = await as('scl').get(`/api/v1/campaigns/${id}`);
    expect(before.body.budgetA.version).toBe(1);
    expect(before.body.currentBudgetVersionA).toBe(2);
    const res = await as('scl').patch(`/api/v1/campaigns/${id}`, { budgetVersionA: 2 });
    expect(res.status).toBe(200);
    expect(res.body.budgetA.version).toBe(2);
    expect(paths(await as('scl').patch(`/api/v1/campaigns/${id}`, { budgetVersionA: 9 }))).toEqual(['body.budgetVersionA']);
  });

  it('an overridden reference ratio keeps its justification; null restores the default', async () => {
    const res = await as('scl').patch(`/api/v1/campaigns/${id}`, { referenceRatio: { value: '1.0000000000000000001', relativeUncertainty: 1e-19, justification: 'test of the override path' } });
    expect(res.body.referenceRatio).toMatchObject({ value: '1.0000000000000000001', isDefault: false, justification: 'test of the override path' });
    const back = await as('scl').patch(`/api/v1/campaigns/${id}`, { referenceRatio: null });
    expect(back.body.referenceRatio).toMatchObject({ value: '1', isDefault: true, justification: null });
  });
});

describe('institute scoping', () => {
  it('an SCL operator neither reads nor changes an HMO-only draft (404)', async () => {
    const hmoDraft = ids['HMO Yb⁺/Sr local ratio, December 2026'];
    expect((await as('scl').get(`/api/v1/campaigns/${hmoDraft}`)).status).toBe(404);
    expect((await as('scl').patch(`/api/v1/campaigns/${hmoDraft}`, { name: 'mine now' })).status).toBe(404);
    expect((await as('scl').post(`/api/v1/campaigns/${hmoDraft}/submit`)).status).toBe(404);
    const list = await as('scl').get('/api/v1/campaigns?pageSize=100');
    expect(list.body.items.some((c: { id: string }) => c.id === hmoDraft)).toBe(false);
    expect((await t.ds.query('SELECT name FROM campaign WHERE id = $1', [hmoDraft]))[0].name).toBe('HMO Yb⁺/Sr local ratio, December 2026');
  });

  it("clock B's institute reads the campaign but may not change or submit it (403)", async () => {
    const sclDraft = ids['SCL–HMO Sr run January 2027'];
    const read = await as('hmo').get(`/api/v1/campaigns/${sclDraft}`);
    expect(read.status).toBe(200);
    expect(read.body.allowed).toMatchObject({ edit: false, submit: false });
    expect((await as('hmo').patch(`/api/v1/campaigns/${sclDraft}`, { name: 'Renamed by HMO' })).status).toBe(403);
    expect((await as('hmo').post(`/api/v1/campaigns/${sclDraft}/submit`)).status).toBe(403);
  });

  it('auditors read every accepted or certified campaign, and no other (docs/decisions/0004-campaign-visibility.md)', async () => {
    const list = await as('auditor').get('/api/v1/campaigns?pageSize=100&sort=name');
    const published = await t.ds.query("SELECT count(*)::int AS n FROM campaign WHERE state IN ('accepted', 'certified')");
    expect(list.body.total).toBe(published[0].n);
    expect(list.body.items.every((c: { state: string }) => c.state === 'accepted' || c.state === 'certified')).toBe(true);
    const names = list.body.items.map((c: { name: string }) => c.name);
    expect([...names].sort((a: string, b: string) => (a < b ? -1 : a > b ? 1 : 0))).toEqual(names);
    const accepted = (await as('auditor').get('/api/v1/campaigns?state=accepted')).body.items;
    const inDb = await t.ds.query("SELECT count(*)::int AS n FROM campaign WHERE state = 'accepted'");
    expect(accepted).toHaveLength(inDb[0].n);
    expect(accepted.every((c: { state: string }) => c.state === 'accepted')).toBe(true);
  });
});

describe('review state machine', () => {
  let id = '';
  it('submit mails the coordinating institute through the outbox (same transaction)', async () => {
    id = (await as('scl').post('/api/v1/campaigns', newCampaign('Mail check campaign 7f3a'))).body.id;
    const res = await as('scl').post(`/api/v1/campaigns/${id}/submit`);
    expect(res.status).toBe(200);
    expect(res.body.state).toBe('submitted');
    const queued = await t.ds.query("SELECT to_address FROM mail_outbox WHERE subject LIKE '%Mail check campaign 7f3a%'");
    expect(queued).toEqual([{ to_address: t.config.coordinatorMail }]);
    await t.deps.mail.flush();
    const mail = (await caughtMail()).filter((m) => m.subject.includes('Mail check campaign 7f3a'));
    expect(mail).toHaveLength(1);
    expect(mail[0].to).toContain(t.config.coordinatorMail);
    expect(mail[0].text).toContain(`/campaigns/${id}`);
  });

  it('refuses illegal transitions with 409 and leaves the state alone', async () => {
    expect((await as('scl').post(`/api/v1/campaigns/${id}/submit`)).status).toBe(409);
    expect((await as('coord').post(`/api/v1/campaigns/${id}/accept`, { comment: 'not under review yet' })).status).toBe(409);
    expect((await as('scl').patch(`/api/v1/campaigns/${id}`, { name: 'late change' })).status).toBe(409);
    expect((await t.ds.query('SELECT state FROM campaign WHERE id = $1', [id]))[0].state).toBe('submitted');
  });

  it('return needs a reason; a returned campaign is editable again and can be resubmitted, reviewed and accepted', async () => {
    expect((await as('coord').post(`/api/v1/campaigns/${id}/start-review`)).body.state).toBe('in_review');
    const noReason = await as('coord').post(`/api/v1/campaigns/${id}/return`, {});
    expect(paths(noReason)).toEqual(['body.reason']);
    const ret = await as('coord').post(`/api/v1/campaigns/${id}/return`, { reason: 'Please describe the link noise check.' });
    expect(ret.body).toMatchObject({ state: 'returned', returnReason: 'Please describe the link noise check.' });
    const edit = await as('scl').patch(`/api/v1/campaigns/${id}`, { operatorNotes: 'Link noise checked with the out-of-loop beat.' });
    expect(edit.status).toBe(200);
    expect(edit.body.allowed).toMatchObject({ edit: true, submit: true });
    expect((await as('scl').post(`/api/v1/campaigns/${id}/submit`)).body.state).toBe('submitted');
    await as('coord').post(`/api/v1/campaigns/${id}/start-review`);
    const acc = await acceptAsReviewer(t, id, tok.coord, { comment: 'fine now' });
    expect(acc.body.state).toBe('accepted');
    expect(acc.body.timeline.map((e: { toState: string }) => e.toState)).toEqual(['draft', 'submitted', 'in_review', 'returned', 'submitted', 'in_review', 'accepted']);
    expect(acc.body.timeline[3]).toMatchObject({ fromState: 'in_review', actor: 'Ansel Brandt', note: 'Please describe the link noise check.' });
    expect((await as('scl').patch(`/api/v1/campaigns/${id}`, { name: 'after acceptance' })).status).toBe(409);
    const audit = await t.ds.query("SELECT action FROM audit_event WHERE entity_type = 'campaign' AND entity_id = $1 AND action NOT LIKE 'campaign.checklist%' ORDER BY id", [id]);
    expect(audit.map((a: { action: string }) => a.action)).toEqual([
      'campaign.created', 'campaign.submitted', 'campaign.in_review', 'campaign.returned', 'campaign.updated', 'campaign.submitted', 'campaign.in_review', 'campaign.accepted',
    ]);
  });

  it('markCampaignCertified moves accepted → certified only, audited; getCampaignForResult gives the full picture', async () => {
    const coord = await actorOf(people.coord);
    const draft = ids['SCL–HMO Sr run January 2027'];
    await expect(t.ds.transaction((m) => markCampaignCertified(m, draft, coord))).rejects.toMatchObject({ status: 409 });
    await expect(t.ds.transaction(async (m) => markCampaignCertified(m, id, await actorOf(people.scl)))).rejects.toMatchObject({ status: 403 });
    await t.ds.transaction((m) => markCampaignCertified(m, id, coord));
    const detail = await as('scl').get(`/api/v1/campaigns/${id}`);
    expect(detail.body.state).toBe('certified');
    expect(detail.body.timeline.at(-1)).toMatchObject({ fromState: 'accepted', toState: 'certified' });

    const r = await t.ds.transaction((m) => getCampaignForResult(m, id));
    // The demo clock's nominal frequency is the in-use ⁸⁷Sr reference value, 429 228 004 229 873.7 Hz (CIPM 2009, Recommendation 2 (CI-2009), list of standard frequencies)
    expect(r.clockA).toMatchObject({ name: 'SCL-Sr1', species: 'Sr87', nominalFrequencyHz: '429228004229873.7', instituteCode: 'SCL' });
    expect(r.clockB.site.name).toBe('HMO clock hall');
    expect(r.clockA.budget.version).toBe(2); // pinned at creation, after the test above added version 2
    expect(r.clockA.site.normalHeightM).toBeCloseTo(r.clockA.site.ellipsoidalHeightM - r.clockA.site.quasigeoidHeightM, 12);
    expect(r.clockB.site.ellipsoidalHeightM - r.clockA.site.ellipsoidalHeightM).toBeGreaterThan(500); // invented demo geometry
    expect(r.link).toMatchObject({ name: 'SCL–HMO long-haul', fibreLengthKm: 420.6 });
    expect(r.referenceRatio).toMatchObject({ value: '1', relativeUncertainty: 0, justification: null });
  });

  it('an inter-species campaign gets ν_B/ν_A by default and names its source', async () => {
    const res = await as('hmo').post('/api/v1/campaigns', { ...newCampaign('Inter-species test'), clockAId: ids['HMO-Sr2'], clockBId: ids['HMO-YbIon'], linkId: ids['HMO local'] });
    expect(res.status).toBe(201);
    // 642121496772657 / 429228004229873.7 (CIPM 2009 Recommendation 2 values), evaluated with decimal.js at 60 digits
    const D = Decimal.clone({ precision: 60 });
    const expected = new D('642121496772657').div('429228004229873.7');
    expect(new D(res.body.referenceRatio.value).div(expected).minus(1).abs().toNumber()).toBeLessThan(1e-32);
    expect(res.body.referenceRatio.source).toMatch(/CIPM 2009/);
  });
});
