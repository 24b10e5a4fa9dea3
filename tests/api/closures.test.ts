import request from 'supertest';
import { issuedCertificate } from '../helpers/certificates';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { reviewChecklistItems } from '../../shared/campaigns';
import { recomputeClosures } from '../../server/closures/closures.service';
import { computeCampaignResult } from '../../server/results/results.service';
import { gatherInputs } from '../../server/network/adjustment.service';
import { adjustmentOptionsSchema } from '../../shared/network';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';

// Clock-ratio closures through the API: the invented demo loop, a consistent and an inconsistent loop made here
// through the product's own routes, isolation by the campaign rule, and the review exception of a failing loop.
// Hand checks: u_c² = Σ (c_i·u(x_i))² (JCGM 100:2008 eq. 10), U = k·u_c (§6.2.1), E_n = ε/U against the expected
// closure 0 (ISO 13528:2015 §9.7, clause number from memory).

let t: TestApp;
const tok: Record<'ines' | 'mira' | 'ansel' | 'petra', string> = { ines: '', mira: '', ansel: '', petra: '' };
const ids = new Map<string, string>();
const id = async (sql: string, v: string) => ((await t.ds.query(sql, [v]))[0] as { id: string }).id;

beforeAll(async () => {
  t = await createTestApp();
  tok.ines = await tokenFor(t, 'ines.varga@saltmarsh-lab.invalid');
  tok.mira = await tokenFor(t, 'mira.ostrowe@highridge-obs.invalid');
  tok.ansel = await tokenFor(t, 'ansel.brandt@geopotential-office.invalid');
  tok.petra = await tokenFor(t, 'petra.lind@audit-bureau.invalid');
  for (const c of ['SCL-Sr1', 'HMO-Sr2', 'HMO-YbIon']) ids.set(c, await id('SELECT id FROM clock WHERE name = $1', c));
  for (const l of ['SCL–HMO long-haul', 'HMO local', 'SCL–HMO ion lab']) ids.set(l, await id('SELECT id FROM fibre_link WHERE name = $1', l));
}, 120_000);
afterAll(() => t.close());

const get = (path: string, token: string) => request(t.app).get(path).set('authorization', `Bearer ${token}`);

/** One campaign made by the lab through the API with an uploaded series y(i) at 20 s over one day. */
async function campaignWithSeries(token: string, name: string, a: string, b: string, link: string, startIso: string, y: (i: number) => number): Promise<string> {
  const start = Date.parse(startIso);
  const created = await request(t.app).post('/api/v1/campaigns').set('authorization', `Bearer ${token}`)
    .send({ name, clockAId: ids.get(a), clockBId: ids.get(b), linkId: ids.get(link), periodStart: new Date(start).toISOString(), periodEnd: new Date(start + 86_400_000).toISOString() });
  expect(created.status, created.text).toBe(201);
  const mjd0 = 40587 + start / 86_400_000; // MJD of the Unix epoch is 40587 (common practice)
  const rows = ['mjd,y'];
  for (let i = 0; i < 4000; i++) rows.push(`${(mjd0 + (i * 20 + 10) / 86_400).toFixed(8)},${y(i).toExponential(9)}`);
  const up = await request(t.app).post(`/api/v1/campaigns/${created.body.id}/uploads`).set('authorization', `Bearer ${token}`)
    .field('epochColumn', '1').field('epochKind', 'mjd').field('valueColumn', '2').field('valueKind', 'offset').field('hasHeader', 'true')
    .attach('file', Buffer.from(rows.join('\n') + '\n'), { filename: `${name.replace(/\W+/g, '-')}.csv`, contentType: 'text/csv' });
  expect(up.status, up.text).toBe(201);
  return created.body.id as string;
}

/** Loop SCL-Sr1 → HMO-Sr2 → HMO-YbIon → SCL-Sr1 with a designed closure ε0: y3 = y1 + y2 − ε0 sample by sample (plus tiny noise). */
async function loopWithClosure(tag: string, startIso: string, epsilon0: number) {
  let s = 12345;
  const n = () => ((s = (s * 16807) % 2147483647) / 2147483647 - 0.5) * 2e-18;
  const a = 6.55e-14;
  const b = -1.1e-15;
  const c1 = await campaignWithSeries(tok.ines, `${tag} Sr/Sr`, 'SCL-Sr1', 'HMO-Sr2', 'SCL–HMO long-haul', startIso, () => a + n());
  const c2 = await campaignWithSeries(tok.mira, `${tag} Yb/Sr local`, 'HMO-Sr2', 'HMO-YbIon', 'HMO local', startIso, () => b + n());
  const c3 = await campaignWithSeries(tok.ines, `${tag} Yb/Sr ion lab`, 'SCL-Sr1', 'HMO-YbIon', 'SCL–HMO ion lab', startIso, () => a + b - epsilon0 + n());
  // What the closure job does after each result (server/jobs/worker.ts), run here in the test's process.
  await t.ds.transaction((m) => recomputeClosures(m, { now: new Date() }));
  const [row] = await t.ds.query(
    `SELECT rc.id FROM ratio_closure rc WHERE (SELECT array_agg(campaign_id ORDER BY campaign_id) FROM ratio_closure_campaign WHERE closure_id = rc.id) = $1::uuid[]`,
    [[c1, c2, c3].sort()],
  );
  return { c1, c2, c3, closureId: (row as { id: string } | undefined)?.id };
}

function checkBudget(d: { budget: { sensitivity: number; standardUncertainty: number }[]; standardUncertainty: number; expandedUncertainty: number; coverageFactor: number; closure: number; en: number }) {
  const uc = Math.sqrt(d.budget.reduce((acc, l) => acc + (l.sensitivity * l.standardUncertainty) ** 2, 0)); // JCGM 100:2008 eq. (10)
  expect(d.standardUncertainty / uc).toBeCloseTo(1, 9);
  expect(d.expandedUncertainty / (d.coverageFactor * uc)).toBeCloseTo(1, 9); // U = k·u_c (§6.2.1)
  expect(d.en).toBeCloseTo(d.closure / d.expandedUncertainty, 9); // ISO 13528:2015 §9.7 with X = 0, U_ref = 0
}

describe('the demo loop', () => {
  it('HMO-Sr2 → HMO-YbIon → SCL-Sr1 closes with |Eₙ| well below 1; the clocks’ systematics cancel', async () => {
    const list = await get('/api/v1/network/closures', tok.ansel);
    expect(list.status, list.text).toBe(200);
    const demo = list.body.items.find((c: { label: string }) => c.label === 'HMO-Sr2 → HMO-YbIon → SCL-Sr1 → HMO-Sr2');
    expect(demo, JSON.stringify(list.body.items.map((c: { label: string }) => c.label))).toBeTruthy();
    expect(list.body.total).toBe(Number((await t.ds.query('SELECT count(*) FROM ratio_closure'))[0].count));
    const d = await get(`/api/v1/network/closures/${demo.id}`, tok.ansel);
    expect(d.status).toBe(200);
    console.info(`demo closure ε = ${d.body.closure}, u = ${d.body.standardUncertainty}, U = ${d.body.expandedUncertainty}, k = ${d.body.coverageFactor}, En = ${d.body.en}`);
    expect(Math.abs(d.body.en)).toBeLessThan(0.7);
    expect(d.body.agreed).toBe(true);
    checkBudget(d.body);
    for (const l of d.body.budget.filter((x: { component: string }) => x.component.startsWith('Clock'))) expect(l.sensitivity).toBe(0);
    expect(d.body.legs.map((l: { sign: number }) => l.sign)).toEqual([1, -1, 1]);
    const csv = await get(`/api/v1/network/closures/${demo.id}/export.csv`, tok.ansel);
    expect(csv.status).toBe(200);
    expect(csv.text).toContain('closure_epsilon');
    const json = await get(`/api/v1/network/closures/${demo.id}/export.json`, tok.ansel);
    expect(JSON.parse(json.text).units.closure).toBe('1 (dimensionless)');
    const all = await get('/api/v1/network/closures.csv', tok.ansel);
    expect(all.text.split('\r\n')[0]).toContain('closure_epsilon,u_epsilon,U_epsilon,k,p,En');
  });
});

describe('loops made through the API', () => {
  it('an adjustment run lists the closures whose every campaign entered it, as checks with their Eₙ', async () => {
    const list = await get('/api/v1/network/closures', tok.ansel);
    const demo = list.body.items.find((c: { label: string }) => c.label === 'HMO-Sr2 → HMO-YbIon → SCL-Sr1 → HMO-Sr2');
    const legs: { campaign_id: string }[] = await t.ds.query('SELECT campaign_id FROM ratio_closure_campaign WHERE closure_id = $1', [demo.id]);
    // What-if for this test: the loop's three campaigns accepted (in the demo one of them is still in review).
    await t.ds.query("UPDATE campaign SET state = 'accepted' WHERE id = ANY($1::uuid[]) AND state NOT IN ('accepted', 'certified')", [legs.map((l) => l.campaign_id)]);
    // Their results, as the worker stores them on acceptance.
    for (const l of legs) await t.ds.transaction((m) => computeCampaignResult(m, l.campaign_id, { actor: null, now: new Date() }));
    const inputs = await gatherInputs(t.ds.manager, adjustmentOptionsSchema.parse({ includeClocks: true }));
    const enteredIds = new Set(inputs.entered!.campaigns.map((c) => c.id));
    const listed = inputs.entered!.closures.find((c) => c.id === demo.id);
    expect(legs.map((l) => enteredIds.has(l.campaign_id)), JSON.stringify(inputs.excluded)).toEqual([true, true, true]);
    expect(listed).toMatchObject({ name: demo.label, agreed: true });
    expect(Math.abs(listed!.en!)).toBeLessThan(1);
    // Every listed closure's campaigns all entered.
    for (const c of inputs.entered!.closures) {
      const ls: { campaign_id: string }[] = await t.ds.query('SELECT campaign_id FROM ratio_closure_campaign WHERE closure_id = $1', [c.id]);
      expect(ls.every((l) => enteredIds.has(l.campaign_id))).toBe(true);
    }
  });

  it('a consistent loop (ε0 = 0) agrees; an inconsistent one (ε0 = 5e-17) fails, with the hand-checked budget', async () => {
    const ok = await loopWithClosure('closure test A', '2026-08-03T00:00:00Z', 0);
    const bad = await loopWithClosure('closure test B', '2026-08-10T00:00:00Z', 5e-17);
    expect(ok.closureId).toBeTruthy();
    expect(bad.closureId).toBeTruthy();
    const good = (await get(`/api/v1/network/closures/${ok.closureId}`, tok.mira)).body;
    const failing = (await get(`/api/v1/network/closures/${bad.closureId}`, tok.mira)).body;
    // Every campaign pins the current budget versions: each clock enters two legs with opposite signs and cancels,
    // leaving the three links (3e-19, 1e-20, 3e-19) and the statistical part: u_c ≥ √(0.09 + 0.0001 + 0.09)·1e-18.
    expect(good.standardUncertainty).toBeGreaterThanOrEqual(Math.sqrt(0.3 ** 2 + 0.01 ** 2 + 0.3 ** 2) * 1e-18 * 0.999999);
    checkBudget(good);
    checkBudget(failing);
    expect(Math.abs(good.closure)).toBeLessThan(3 * good.standardUncertainty);
    expect(good.agreed).toBe(true);
    expect(failing.closure).toBeCloseTo(5e-17, 18); // the designed ε0, to within the 1e-18 noise
    expect(failing.agreed).toBe(false);
    expect(Math.abs(failing.en)).toBeGreaterThan(1);
    const listFailing = await get('/api/v1/network/closures?failing=true', tok.mira);
    expect(listFailing.body.items.map((c: { id: string }) => c.id)).toContain(bad.closureId);
    expect(listFailing.body.items.map((c: { id: string }) => c.id)).not.toContain(ok.closureId);
    const ofCampaign = await get(`/api/v1/campaigns/${bad.c2}/closures`, tok.mira);
    expect(ofCampaign.body.items.map((c: { id: string }) => c.id)).toEqual([bad.closureId]);

    // Isolation: the loop holds a campaign of Highridge alone (HMO-Sr2 → HMO-YbIon), so Saltmarsh's lab does not see it.
    expect((await get(`/api/v1/network/closures/${bad.closureId}`, tok.ines)).status).toBe(404);
    expect((await get('/api/v1/network/closures', tok.ines)).body.items.map((c: { id: string }) => c.id)).not.toContain(bad.closureId);
    expect((await get(`/api/v1/campaigns/${bad.c1}/closures`, tok.ines)).body).toMatchObject({ items: [], total: 0 });
    expect((await get(`/api/v1/network/closures/${bad.closureId}/export.csv`, tok.ines)).status).toBe(404);
    // Drafts are the labs' own: neither the coordinator nor the auditor sees these closures yet.
    expect((await get(`/api/v1/network/closures/${bad.closureId}`, tok.ansel)).status).toBe(404);
    expect((await get(`/api/v1/network/closures/${bad.closureId}`, tok.petra)).status).toBe(404);

    // Review: the failing closure is an exception that needs a justification at acceptance and at certification.
    for (const [c, owner] of [[bad.c1, tok.ines], [bad.c2, tok.mira], [bad.c3, tok.ines]] as const) {
      expect((await request(t.app).post(`/api/v1/campaigns/${c}/submit`).set('authorization', `Bearer ${owner}`).send({})).status).toBe(200);
      expect((await request(t.app).post(`/api/v1/campaigns/${c}/start-review`).set('authorization', `Bearer ${tok.ansel}`).send({})).status).toBe(200);
    }
    expect((await get(`/api/v1/network/closures/${bad.closureId}`, tok.ansel)).status).toBe(200);
    const detail = await get(`/api/v1/campaigns/${bad.c1}`, tok.ansel);
    expect(detail.body.review.exceptions.map((x: { code: string }) => x.code)).toContain('closure-failing');
    for (const item of reviewChecklistItems) {
      await request(t.app).post(`/api/v1/campaigns/${bad.c1}/checklist`).set('authorization', `Bearer ${tok.ansel}`).send({ item, checked: true });
    }
    const refused = await request(t.app).post(`/api/v1/campaigns/${bad.c1}/accept`).set('authorization', `Bearer ${tok.ansel}`).send({ comment: 'Reviewed: budgets, ratio and series checked.' });
    expect(refused.status, refused.text).toBe(400);
    expect(JSON.stringify(refused.body.issues)).toContain('closure-failing');
    expect((await t.ds.query('SELECT state FROM campaign WHERE id = $1', [bad.c1]))[0].state).toBe('in_review');
    const accepted = await request(t.app).post(`/api/v1/campaigns/${bad.c1}/accept`).set('authorization', `Bearer ${tok.ansel}`)
      .send({ comment: 'Reviewed: budgets, ratio and series checked.', justification: 'The loop misclosure is traced to the ion-lab link and does not affect this Sr/Sr comparison.' });
    expect(accepted.status, accepted.text).toBe(200);
    const [row] = await t.ds.query('SELECT acceptance_justification, acceptance_exceptions FROM campaign WHERE id = $1', [bad.c1]);
    expect(row.acceptance_justification).toContain('ion-lab link');
    expect(JSON.stringify(row.acceptance_exceptions)).toContain('ratio closure');
    await t.ds.transaction((m) => computeCampaignResult(m, bad.c1, { actor: null, now: new Date() }));
    const noJustification = await request(t.app).post(`/api/v1/campaigns/${bad.c1}/certificates`).set('authorization', `Bearer ${tok.ansel}`).send({ comment: 'Certified after review.' });
    expect(noJustification.status, noJustification.text).toBe(400);
    expect(JSON.stringify(noJustification.body.issues)).toContain('closure-failing');
    // Certificates are issued by a worker job: the request is checked at once (202), the job renders and signs.
    const issued = await issuedCertificate(t, tok.ansel, `/api/v1/campaigns/${bad.c1}/certificates`,
      { comment: 'Certified after review.', justification: 'Closure failure explained by the ion-lab link; this comparison is unaffected.' });
    expect(issued.certificate.state).toBe('valid');
  }, 180_000);
});
