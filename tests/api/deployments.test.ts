import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { computeCampaignResult } from '../../server/results/results.service';
import { C2_M2_PER_S2 } from '../../server/science/constants';
import { TRANSPORT_CAMPAIGNS, TRAILER_BAY_TIE, TRANSPORT_OFFSETS } from '../../seeds/transport.seed';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';

// Deployments of transportable clocks and side-by-side campaigns: CRUD with overlaps refused, who may write
// (docs/decisions/0007-deployments.md), campaign sites from the deployments, refusals when the clock moved or was
// not deployed, and the side-by-side offset of the seeded demo campaigns.

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
  const rows: { name: string; id: string }[] = await t.ds.query('SELECT name, id FROM clock UNION ALL SELECT name, id FROM fibre_link UNION ALL SELECT name, id FROM campaign UNION ALL SELECT name, id FROM site');
  ids = Object.fromEntries(rows.map((r) => [r.name, r.id]));
});
afterAll(() => t.close());

const as = (who: keyof typeof people) => ({
  get: (url: string) => request(t.app).get(url).set('authorization', `Bearer ${tok[who]}`),
  post: (url: string, body: object = {}) => request(t.app).post(url).set('authorization', `Bearer ${tok[who]}`).send(body),
  patch: (url: string, body: object) => request(t.app).patch(url).set('authorization', `Bearer ${tok[who]}`).send(body),
  delete: (url: string) => request(t.app).delete(url).set('authorization', `Bearer ${tok[who]}`),
});
const paths = (res: request.Response) => (res.body.issues ?? []).map((i: { path: string }) => i.path);

/** A transportable clock of SCL registered through the API, homed at the SCL clock hall. */
async function sclTransportable(name: string): Promise<string> {
  const res = await as('scl').post('/api/v1/clocks', { siteId: ids['SCL clock hall'], name, kind: 'optical_lattice', species: 'Sr87', nominalFrequencyHz: '429228004229873.7', mobility: 'transportable' });
  expect(res.status).toBe(201);
  expect(res.body.mobility).toBe('transportable');
  return res.body.id;
}

describe('deployments', () => {
  it('every role reads the seeded timeline of NGCO-TSr1: trailer bay, Harbour Light, back at the trailer bay', async () => {
    for (const who of ['scl', 'hmo', 'coord', 'auditor'] as const) {
      const res = await as(who).get(`/api/v1/clocks/${ids['NGCO-TSr1']}/deployments`);
      expect(res.status).toBe(200);
      expect(res.body.clock.mobility).toBe('transportable');
      expect(res.body.deployments.map((d: { site: { name: string } }) => d.site.name)).toEqual(['SCL trailer bay', 'Harbour Light tide-gauge station', 'SCL trailer bay']);
      expect(res.body.deployments[2].departedAt).toBeNull();
      expect(res.body.deployments.map((d: { budgetVersions: number[] }) => d.budgetVersions)).toEqual([[1], [2], [3]]);
      // NGCO's clock: only the coordinator may write
      expect(res.body.canWrite).toBe(who === 'coord');
    }
    const atHarbour = await as('auditor').get(`/api/v1/sites/${ids['Harbour Light tide-gauge station']}/clocks`);
    expect(atHarbour.status).toBe(200);
    expect(atHarbour.body.items).toEqual([expect.objectContaining({ clock: expect.objectContaining({ name: 'NGCO-TSr1' }), arrivedAt: '2026-04-28T16:00:00.000Z', departedAt: '2026-05-29T08:00:00.000Z' })]);
    const atHall = (await as('auditor').get(`/api/v1/sites/${ids['SCL clock hall']}/clocks`)).body.items as { clock: { name: string }; arrivedAt: string | null }[];
    expect(atHall.find((r) => r.clock.name === 'SCL-Sr1')?.arrivedAt).toBeNull();
  });

  it('lab staff create, change and remove deployments of their clock; overlaps are refused naming the field', async () => {
    const clock = await sclTransportable('SCL-TSr-test-1');
    const base = `/api/v1/clocks/${clock}/deployments`;
    const first = await as('scl').post(base, { siteId: ids['SCL trailer bay'], arrivedAt: '2027-03-01T00:00:00Z', departedAt: '2027-03-20T00:00:00Z', note: 'test' });
    expect(first.status).toBe(201);
    expect(first.body.site.name).toBe('SCL trailer bay');
    const overlap = await as('scl').post(base, { siteId: ids['Harbour Light tide-gauge station'], arrivedAt: '2027-03-19T00:00:00Z' });
    expect(overlap.status).toBe(400);
    expect(overlap.headers['content-type']).toContain('application/problem+json');
    expect(paths(overlap)).toEqual(['body.arrivedAt']);
    expect(overlap.body.detail).toMatch(/overlaps/);
    // departure and next arrival at the same instant are fine
    const second = await as('scl').post(base, { siteId: ids['Harbour Light tide-gauge station'], arrivedAt: '2027-03-20T00:00:00Z', departedAt: '2027-04-10T00:00:00Z' });
    expect(second.status).toBe(201);
    // moving the first one into the second is refused, nothing stored
    const into = await as('scl').patch(`${base}/${first.body.id}`, { departedAt: '2027-03-25T00:00:00Z' });
    expect(into.status).toBe(400);
    expect((await as('scl').get(base)).body.deployments[0].departedAt).toBe('2027-03-20T00:00:00.000Z');
    const changed = await as('scl').patch(`${base}/${first.body.id}`, { note: 'trailer re-levelled' });
    expect(changed.status).toBe(200);
    expect(changed.body.note).toBe('trailer re-levelled');
    const bad = await as('scl').post(base, { siteId: ids['SCL trailer bay'], arrivedAt: '2027-06-10T00:00:00Z', departedAt: '2027-06-01T00:00:00Z' });
    expect(bad.status).toBe(400);
    expect(paths(bad)).toEqual(['body.departedAt']);
    expect((await as('scl').delete(`${base}/${second.body.id}`)).status).toBe(200);
    expect((await as('scl').get(base)).body.deployments).toHaveLength(1);
    const audit = await t.ds.query("SELECT action FROM audit_event WHERE entity_id = $1 AND action LIKE 'clock.deployment-%' ORDER BY id", [clock]);
    expect(audit.map((a: { action: string }) => a.action)).toEqual(['clock.deployment-added', 'clock.deployment-added', 'clock.deployment-updated', 'clock.deployment-removed']);
  });

  it('isolation: lab staff of another institute and auditors cannot write; the coordinator can', async () => {
    const clock = await sclTransportable('SCL-TSr-test-2');
    const base = `/api/v1/clocks/${clock}/deployments`;
    const body = { siteId: ids['SCL trailer bay'], arrivedAt: '2027-05-01T00:00:00Z' };
    expect((await as('hmo').post(base, body)).status).toBe(403);
    expect((await as('auditor').post(base, body)).status).toBe(403);
    expect((await as('hmo').post(`/api/v1/clocks/${ids['NGCO-TSr1']}/deployments`, { siteId: ids['SCL trailer bay'], arrivedAt: '2028-01-01T00:00:00Z' })).status).toBe(403);
    const byCoord = await as('coord').post(base, body);
    expect(byCoord.status).toBe(201);
    expect((await as('hmo').patch(`${base}/${byCoord.body.id}`, { note: 'x' })).status).toBe(403);
    expect((await as('hmo').delete(`${base}/${byCoord.body.id}`)).status).toBe(403);
    expect((await as('hmo').get(base)).body.canWrite).toBe(false);
  });

  it('a stationary clock has no deployments; a deployment a budget version was evaluated for stays', async () => {
    const stationary = await as('scl').post(`/api/v1/clocks/${ids['SCL-Sr1']}/deployments`, { siteId: ids['SCL trailer bay'], arrivedAt: '2027-05-01T00:00:00Z' });
    expect(stationary.status).toBe(400);
    expect(stationary.body.detail).toMatch(/stationary/);
    const tsr = (await as('coord').get(`/api/v1/clocks/${ids['NGCO-TSr1']}/deployments`)).body;
    const removed = await as('coord').delete(`/api/v1/clocks/${ids['NGCO-TSr1']}/deployments/${tsr.deployments[1].id}`);
    expect(removed.status).toBe(409);
    // a new budget version tied to a deployment of another clock is refused
    const clock = await sclTransportable('SCL-TSr-test-3');
    const tied = await as('scl').post(`/api/v1/clocks/${clock}/budget-versions`, { rows: [], comment: 'x', deploymentId: tsr.deployments[0].id });
    expect(tied.status).toBe(400);
    expect(paths(tied)).toEqual(['body.deploymentId']);
  });
});

describe('campaign sites from deployments', () => {
  it('a side-by-side campaign takes the deployment’s site and its local tie; refused when the clock moved or was not deployed', async () => {
    const clock = await sclTransportable('SCL-TSr-test-4');
    const base = `/api/v1/clocks/${clock}/deployments`;
    expect((await as('scl').post(base, { siteId: ids['SCL trailer bay'], arrivedAt: '2027-07-01T00:00:00Z', departedAt: '2027-07-20T00:00:00Z' })).status).toBe(201);
    expect((await as('scl').post(base, { siteId: ids['Harbour Light tide-gauge station'], arrivedAt: '2027-07-22T00:00:00Z', departedAt: '2027-08-20T00:00:00Z' })).status).toBe(201);
    const campaign = (start: string, end: string, extra: object = {}) => ({
      name: `test side by side ${start}`, clockAId: ids['SCL-Sr1'], clockBId: clock, linkId: ids['SCL hall–trailer bay'], periodStart: start, periodEnd: end,
      role: 'side-by-side', localTie: { kind: 'entered', deltaC_m2s2: -4.12, uncertainty_m2s2: 0.03, source: 'test levelling note 1' }, ...extra,
    });
    const ok = await as('scl').post('/api/v1/campaigns', campaign('2027-07-03T00:00:00Z', '2027-07-10T00:00:00Z'));
    expect(ok.status).toBe(201);
    expect(ok.body.role).toBe('side-by-side');
    expect(ok.body.siteB.name).toBe('SCL trailer bay');
    expect(ok.body.siteA.name).toBe('SCL clock hall');
    expect(ok.body.localTie).toEqual({ deltaC_m2s2: -4.12, uncertainty_m2s2: 0.03, source: 'test levelling note 1' });

    const moved = await as('scl').post('/api/v1/campaigns', campaign('2027-07-15T00:00:00Z', '2027-07-25T00:00:00Z'));
    expect(moved.status).toBe(400);
    expect(moved.headers['content-type']).toContain('application/problem+json');
    expect(paths(moved)).toEqual(['body.clockBId']);
    expect(moved.body.detail).toMatch(/moved during the campaign period/);
    const nowhere = await as('scl').post('/api/v1/campaigns', campaign('2027-10-01T00:00:00Z', '2027-10-10T00:00:00Z'));
    expect(nowhere.status).toBe(400);
    expect(paths(nowhere)).toEqual(['body.clockBId']);
    expect(nowhere.body.detail).toMatch(/not deployed/);
    // the sites differ, so a side-by-side campaign needs a tie; benchmarks work (both tied to SCL-BM1)
    expect(paths(await as('scl').post('/api/v1/campaigns', campaign('2027-07-03T00:00:00Z', '2027-07-10T00:00:00Z', { localTie: null })))).toEqual(['body.localTie']);
    const fromBenchmarks = await as('scl').post('/api/v1/campaigns', campaign('2027-07-04T00:00:00Z', '2027-07-09T00:00:00Z', { name: 'test bm tie', localTie: { kind: 'benchmarks', gravity_m_s2: 9.81 } }));
    expect(fromBenchmarks.status).toBe(201);
    // trailer bay tie 1.38 m, hall 1.80 m to SCL-BM1: ΔC = 9.81·(1.38 − 1.80) = −4.1202 m²/s² (hand computation)
    expect(fromBenchmarks.body.localTie.deltaC_m2s2).toBeCloseTo(-4.1202, 6);

    // moving the period into the Harbour Light deployment: sites follow, the bay link no longer joins them
    const wrongLink = await as('scl').patch(`/api/v1/campaigns/${ok.body.id}`, { periodStart: '2027-07-25T00:00:00Z', periodEnd: '2027-08-01T00:00:00Z', role: 'remote', localTie: null });
    expect(wrongLink.status).toBe(400);
    expect(paths(wrongLink)).toEqual(['body.linkId']);
    const remote = await as('scl').patch(`/api/v1/campaigns/${ok.body.id}`, { periodStart: '2027-07-25T00:00:00Z', periodEnd: '2027-08-01T00:00:00Z', role: 'remote', localTie: null, linkId: ids['SCL–Harbour Light'] });
    expect(remote.status).toBe(200);
    expect(remote.body.siteB.name).toBe('Harbour Light tide-gauge station');
    expect(remote.body.localTie).toBeNull();
    const movedPeriod = await as('scl').patch(`/api/v1/campaigns/${ok.body.id}`, { periodEnd: '2027-08-25T00:00:00Z' });
    expect(movedPeriod.status).toBe(400);
    expect(paths(movedPeriod)).toEqual(['body.clockBId']);
  });

  it('the seeded side-by-side campaigns show the offset corrected for the local tie, and stay out of the network adjustment', async () => {
    for (const key of ['before', 'after'] as const) {
      const id = ids[TRANSPORT_CAMPAIGNS[key]];
      const dto = await t.ds.transaction((m) => computeCampaignResult(m, id, { actor: null, now: new Date() }));
      const r = dto.result;
      const sbs = r.sideBySide!;
      expect(sbs).toBeTruthy();
      // offset = y − ΔC_local/c² (redshift relation, docs/science.md); u² = u²(y) + (u(ΔC)/c²)² (JCGM 100:2008 eq. 10)
      expect(sbs.localDeltaC_m2s2).toBe(TRAILER_BAY_TIE.deltaC_m2s2);
      expect(sbs.offset).toBeCloseTo(r.fractionalOffset.y - TRAILER_BAY_TIE.deltaC_m2s2 / C2_M2_PER_S2, 30);
      expect(sbs.standardUncertainty).toBeCloseTo(Math.hypot(r.fractionalOffset.standardUncertainty, TRAILER_BAY_TIE.uncertainty_m2s2 / C2_M2_PER_S2), 30);
      expect(sbs.expandedUncertainty).toBeCloseTo(sbs.coverageFactor * sbs.standardUncertainty, 30);
      // the invented offset of the series comes back within its expanded uncertainty
      expect(Math.abs(sbs.offset - TRANSPORT_OFFSETS.get(TRANSPORT_CAMPAIGNS[key])!)).toBeLessThan(sbs.expandedUncertainty);
      expect(r.cautions.some((c) => c.startsWith('Side-by-side campaign'))).toBe(true);
    }
    const remote = await t.ds.transaction((m) => computeCampaignResult(m, ids[TRANSPORT_CAMPAIGNS.remote], { actor: null, now: new Date() }));
    expect(remote.result.sideBySide ?? null).toBeNull();
    // Harbour Light is 5.75 m below the hall: ΔC ≈ −5.75 m · 9.81 m/s² ≈ −56 m²/s², plus c²·2.6e-17 ≈ +2.3 m²/s² of clock offset
    expect(remote.result.deltaC_m2s2.value).toBeGreaterThan(-56.4 + 2.34 - 1);
    expect(remote.result.deltaC_m2s2.value).toBeLessThan(-56.4 + 2.34 + 1);

    const { loadAcceptedCampaigns } = await import('../../server/network/registry-bridge');
    const accepted = await loadAcceptedCampaigns(t.ds.manager);
    const names = accepted.map((c) => c.name);
    expect(names).toContain(TRANSPORT_CAMPAIGNS.remote);
    expect(names).not.toContain(TRANSPORT_CAMPAIGNS.before);
    expect(names).not.toContain(TRANSPORT_CAMPAIGNS.after);
    const remoteRow = accepted.find((c) => c.name === TRANSPORT_CAMPAIGNS.remote)!;
    expect(remoteRow.siteBId).toBe(ids['Harbour Light tide-gauge station']);
  });
});
