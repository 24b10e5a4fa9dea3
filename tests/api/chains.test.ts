import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { computeCampaignResult } from '../../server/results/results.service';
import { gatherInputs } from '../../server/network/adjustment.service';
import { adjustmentOptionsSchema } from '../../shared/network';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';

// Calibration chains against the invented demo: NGCO-TSr1 side by side at SCL before and after its stay at the
// Harbour Light tide gauge. The arithmetic itself is checked against hand computations in tests/unit/science.

const CHAIN = 'NGCO-TSr1 Harbour Light chain (April–June 2026)';
const C2 = 299_792_458 ** 2; // m²/s², c exact (SI Brochure 9th ed., Table 1)
let t: TestApp;
let coordinator: string;
let auditor: string;
let hmoOperator: string;
let chainId: string;
let parts: { remote: string; before: string; after: string; T: string; R: string };

beforeAll(async () => {
  t = await createTestApp();
  coordinator = await tokenFor(t, 'ansel.brandt@geopotential-office.invalid');
  auditor = await tokenFor(t, 'petra.lind@audit-bureau.invalid');
  hmoOperator = await tokenFor(t, 'mira.ostrowe@highridge-obs.invalid');
  const [row] = await t.ds.query('SELECT * FROM calibration_chain WHERE name = $1', [CHAIN]);
  chainId = row.id;
  parts = { remote: row.remote_campaign_id, before: row.before_campaign_id, after: row.after_campaign_id, T: row.transportable_clock_id, R: row.reference_clock_id };
  for (const id of [parts.remote, parts.before, parts.after]) {
    const has = await t.ds.query('SELECT 1 FROM comparison_result WHERE campaign_id = $1', [id]);
    if (has.length === 0) await t.ds.transaction((m) => computeCampaignResult(m, id, { actor: null, now: new Date() }));
  }
}, 120_000);
afterAll(() => t.close());

const get = (url: string, token: string) => request(t.app).get(url).set('authorization', `Bearer ${token}`);

describe('the demo chain', () => {
  it('is listed for the coordinator, paged', async () => {
    const res = await get('/api/v1/chains', coordinator);
    expect(res.status).toBe(200);
    expect(res.body).toMatchObject({ page: 1, pageSize: 25 });
    expect(res.body.items.map((c: { name: string }) => c.name)).toContain(CHAIN);
  });

  it('is hidden (list and detail) from lab staff of an institute that sees none of its campaigns', async () => {
    const list = await get('/api/v1/chains', hmoOperator);
    expect(list.status).toBe(200);
    expect(list.body.items.map((c: { id: string }) => c.id)).not.toContain(chainId);
    expect((await get(`/api/v1/chains/${chainId}`, hmoOperator)).status).toBe(404);
    expect((await get(`/api/v1/chains/${chainId}/result`, hmoOperator)).status).toBe(404);
  });

  it('has a result with ΔC, U, k, p, the before/after Eₙ, and T’s budget cancelling exactly', async () => {
    const res = await get(`/api/v1/chains/${chainId}/result`, coordinator);
    expect(res.status, res.text).toBe(200);
    const r = res.body;
    // ΔC = c²·(y_r − ȳ_s) (first-order redshift, Mehlstäubler et al. 2018 eq. 1), from the parts the answer states.
    expect(r.deltaC_m2s2.value / (C2 * (r.yRemote - r.ySideBySide))).toBeCloseTo(1, 9);
    const w = r.calibrations.reduce((s: number, c: { weight: number }) => s + c.weight, 0);
    expect(w).toBeCloseTo(1, 12);
    expect(r.deltaC_m2s2.expandedUncertainty).toBeCloseTo(r.deltaC_m2s2.coverageFactor * r.deltaC_m2s2.standardUncertainty, 9);
    expect(r.deltaC_m2s2.coverageProbability).toBeCloseTo(0.9545, 4);
    // The reference clock's pinned budget version is the same in all three campaigns: it cancels exactly (sensitivity
    // −c² + w_b·c² + w_a·c² = 0). The demo's T campaigns pin one version too (seeds/transport.seed.ts), so T's
    // systematic is one quantity with sensitivity +c² − w_b·c² − w_a·c² = 0: it cancels.
    const pinned: { a: string; b: string }[] = await t.ds.query('SELECT budget_version_a_id AS a, budget_version_b_id AS b FROM campaign WHERE id = ANY($1::uuid[])', [[parts.remote, parts.before, parts.after]]);
    const clockOf: { id: string; clock: string }[] = await t.ds.query('SELECT id, clock_id AS clock FROM clock_budget_version WHERE id = ANY($1::uuid[])', [pinned.flatMap((p) => [p.a, p.b])]);
    const rVersions = new Set(clockOf.filter((x) => x.clock === parts.R).map((x) => x.id));
    const tVersions = new Set(clockOf.filter((x) => x.clock === parts.T).map((x) => x.id));
    expect(rVersions.size).toBe(1);
    const rLine = r.lines.find((l: { key: string }) => l.key === `budget:${[...rVersions][0]}`);
    expect(rLine.sensitivity_m2s2).toBe(0);
    expect(rLine.cancels).toBe(true);
    const tLines = r.lines.filter((l: { key: string }) => [...tVersions].some((v) => l.key === `budget:${v}`));
    expect(tVersions.size).toBe(1);
    expect(tLines.length).toBe(1);
    expect(tLines[0].cancels).toBe(true);
    const tSum = tLines.reduce((s: number, l: { sensitivity_m2s2: number }) => s + l.sensitivity_m2s2, 0);
    expect(Math.abs(tSum) / C2).toBeLessThan(1e-12);
    // Both calibrations exist: the before/after difference with its E_n = d/U(d), U = 2u (ISO 13528:2015 §9.7).
    expect(r.beforeAfter).not.toBeNull();
    expect(r.beforeAfter.en).toBeCloseTo(r.beforeAfter.difference / (2 * r.beforeAfter.standardUncertainty), 9);
    expect(r.transport.origin).toBe('before-after');
    expect(r.transport.standardUncertainty).toBeCloseTo(Math.abs(r.beforeAfter.difference) / (2 * Math.sqrt(3)), 30);
    expect(r.cautions.join(' ')).toMatch(/verify against your national datum authority and your lab’s quality procedures/);
    console.log('demo chain', JSON.stringify({ deltaC: r.deltaC_m2s2, deltaH: r.deltaH_m.value, en: r.beforeAfter.en, d: r.beforeAfter.difference, uTransport: r.transport.standardUncertainty }));
  });

  it('exports CSV and JSON with units', async () => {
    const csv = await get(`/api/v1/chains/${chainId}/result.csv`, auditor);
    expect(csv.status).toBe(200);
    expect(csv.text.split('\r\n')[0]).toBe('section,quantity,value,standard_uncertainty,expanded_uncertainty,unit,note');
    expect(csv.text).toMatch(/result,delta_C,[^,]+,[^,]+,[^,]+,m2\/s2,/);
    const json = await get(`/api/v1/chains/${chainId}/result.json`, auditor);
    expect(json.status).toBe(200);
    expect(JSON.parse(json.text).deltaC_m2s2.unit).toBe('m2/s2');
  });

  it('enters the adjustment as one observation; its campaigns do not enter again', async () => {
    // What-if for this test: the demo's Harbour Light benchmark is not part of the levelling network, so tie the gauge
    // house to the benchmark of the SCL clock hall (5.75 m lower, as the invented sites are) to let the chain in.
    await t.ds.query(`UPDATE site h SET benchmark_code = s.benchmark_code, tie_height_difference_m = s.tie_height_difference_m - 5.75, tie_u_m = 0.002
      FROM site s WHERE s.name = 'SCL clock hall' AND h.name = 'Harbour Light tide-gauge station'`);
    const inputs = await gatherInputs(t.ds.manager, adjustmentOptionsSchema.parse({ includeClocks: true }));
    const ids = inputs.adjustment.observations.map((o) => o.id);
    expect(ids, JSON.stringify(inputs.excluded)).toContain(`chain:${chainId}`);
    for (const c of [parts.remote, parts.before, parts.after]) expect(ids).not.toContain(`clock:${c}`);
    expect(inputs.entered!.chains.map((c) => c.id)).toEqual([chainId]);
    expect(inputs.entered!.campaigns.filter((c) => c.via === 'chain').map((c) => c.id).sort()).toEqual([parts.remote, parts.before, parts.after].sort());
    expect(inputs.entered!.clocks.map((c) => c.id)).toContain(parts.T);
    // One observation from the reference clock's site to the remote site, with the link as a shared parameter.
    const ob = inputs.adjustment.observations.find((o) => o.id === `chain:${chainId}`)!;
    const [link] = await t.ds.query("SELECT id FROM fibre_link WHERE name = 'SCL–Harbour Light'");
    expect(ob.terms!.map((x) => x.name)).toContain(`link:${link.id}`);
    // The reconciliation has a row of its own for the chain (source 'chain').
    const rec = await get('/api/v1/network/reconciliation', coordinator);
    expect(rec.status).toBe(200);
    const row = rec.body.rows.find((x: { source?: string; chainId?: string }) => x.source === 'chain' && x.chainId === chainId);
    expect(row, JSON.stringify(rec.body.rows.map((x: { campaignLabel: string }) => x.campaignLabel))).toBeDefined();
  });
});

describe('creating chains', () => {
  const post = (body: object, token = coordinator) => request(t.app).post('/api/v1/chains').set('authorization', `Bearer ${token}`).send(body);
  const base = () => ({ name: 'NGCO-TSr1 test chain', transportableClockId: parts.T, referenceClockId: parts.R, remoteCampaignId: parts.remote });

  it('refuses a second chain on the same remote campaign (409), nothing stored', async () => {
    const res = await post({ ...base(), beforeCampaignId: parts.before, afterCampaignId: parts.after });
    expect(res.status, res.text).toBe(409);
    expect((await t.ds.query('SELECT count(*)::int AS n FROM calibration_chain'))[0].n).toBe(1);
  });

  it('names the field at fault: a side-by-side campaign as the remote one, and before/after out of time order', async () => {
    const res = await post({ ...base(), remoteCampaignId: parts.before, beforeCampaignId: parts.after, afterCampaignId: null });
    expect(res.status).toBe(400);
    const paths = res.body.issues.map((i: { path: string }) => i.path);
    expect(paths).toContain('body.remoteCampaignId');
    expect(paths).toContain('body.beforeCampaignId');
  });

  it('with one calibration, the transport reproducibility must be entered', async () => {
    // The demo chain is certified by the demo seed, so it stays (a certified chain is never deleted): the rule is
    // checked on a new chain (refused before anything else is looked at) and on the demo chain changed to one calibration.
    const missing = await post({ ...base(), afterCampaignId: parts.after });
    expect(missing.status).toBe(400);
    expect(missing.body.issues.map((i: { path: string }) => i.path)).toContain('body.transportReproducibility');
    const patch = (body: object) => request(t.app).patch(`/api/v1/chains/${chainId}`).set('authorization', `Bearer ${coordinator}`).send(body);
    const stillMissing = await patch({ beforeCampaignId: null });
    expect(stillMissing.status).toBe(400);
    expect(stillMissing.body.issues.map((i: { path: string }) => i.path)).toContain('body.transportReproducibility');
    const ok = await patch({ beforeCampaignId: null, transportReproducibility: 2e-18, transportReproducibilitySource: 'lab transport study (invented)' });
    expect(ok.status, ok.text).toBe(200);
    const [row] = await t.ds.query('SELECT * FROM calibration_chain WHERE id = $1', [chainId]);
    expect(row.transport_reproducibility).toBe(2e-18);
    expect(row.before_campaign_id).toBeNull();
    const audit = await t.ds.query("SELECT action FROM audit_event WHERE entity_id = $1", [chainId]);
    expect(audit.map((a: { action: string }) => a.action)).toContain('chain.update');
    const r = await get(`/api/v1/chains/${chainId}/result`, coordinator);
    expect(r.status, r.text).toBe(200);
    expect(r.body.beforeAfter).toBeNull();
    expect(r.body.transport).toMatchObject({ origin: 'entered', standardUncertainty: 2e-18 });
    const line = r.body.lines.find((l: { key: string }) => l.key === 'transport');
    expect(line.contribution_m2s2).toBeCloseTo(C2 * 2e-18, 9);
    // The certified chain cannot be deleted.
    const del = await request(t.app).delete(`/api/v1/chains/${chainId}`).set('authorization', `Bearer ${coordinator}`);
    expect(del.status).toBe(409);
  });

  it('lab staff of another institute than T’s may not create one', async () => {
    const res = await post({ ...base(), name: 'not mine', afterCampaignId: parts.after, transportReproducibility: 1e-18, transportReproducibilitySource: 'x y z' }, hmoOperator);
    expect(res.status, res.text).toBe(403);
    expect((await t.ds.query("SELECT count(*)::int AS n FROM calibration_chain WHERE name = 'not mine'"))[0].n).toBe(0);
  });
});
