import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { stopQueues } from '../../server/jobs/queue';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';

// Tide systems are stated, never assumed: a fixed value without one stops a run (422 naming it, nothing stored);
// sites and grids carry theirs through the API; a fixed value stated in another system than its datum is converted.

let t: TestApp;
let coordinator: string;
let operator: string;
const bearer = (tok: string) => ({ authorization: `Bearer ${tok}` });
beforeAll(async () => {
  t = await createTestApp();
  coordinator = await tokenFor(t, 'ansel.brandt@geopotential-office.invalid');
  operator = await tokenFor(t, 'ines.varga@saltmarsh-lab.invalid');
});
afterAll(async () => {
  await stopQueues();
  await t?.close();
});

async function benchmark(code: string) {
  const list = await request(t.app).get('/api/v1/network/benchmarks').query({ pageSize: 200 }).set(bearer(coordinator));
  const b = list.body.items.find((x: { code: string }) => x.code === code);
  return (await request(t.app).get(`/api/v1/network/benchmarks/${b.id}`).set(bearer(coordinator))).body;
}
type BenchmarkDto = { code: string; name: string; datumId: string; crs: string; coordinates: number[]; fixed: boolean; state: string; monumentation: string | null; knownC_m2s2: number; knownUncertaintyC_m2s2: number | null };
const asInput = (b: BenchmarkDto, tideSystem: string | null) => ({
  code: b.code, name: b.name, datumId: b.datumId, crs: b.crs, coordinates: b.coordinates, fixed: b.fixed, state: b.state, monumentation: b.monumentation,
  known: { kind: 'C', value: b.knownC_m2s2, uncertainty: b.knownUncertaintyC_m2s2 ?? 0, ...(tideSystem ? { tideSystem } : {}) },
});

describe('tide systems of fixed values', () => {
  it('the demo states them: CD-01 zero-tide (its datum), HD-01 zero-tide in a mean-tide datum', async () => {
    expect((await benchmark('CD-01')).knownTideSystem).toBe('zero-tide');
    expect((await benchmark('HD-01')).knownTideSystem).toBe('zero-tide');
  });

  it('a fixed value without a tide system stops a run with 422 naming it; stating it lets the run start', async () => {
    const cd01 = await benchmark('CD-01');
    const put = await request(t.app).put(`/api/v1/network/benchmarks/${cd01.id}`).set(bearer(coordinator)).send(asInput(cd01, null));
    expect(put.status).toBe(200);
    expect(put.body.knownTideSystem).toBeNull();
    const [{ n: before }] = await t.ds.query('SELECT count(*)::int AS n FROM adjustment_run');
    const run = await request(t.app).post('/api/v1/network/runs').set(bearer(coordinator)).send({});
    expect(run.status).toBe(422);
    expect(run.headers['content-type']).toContain('application/problem+json');
    expect(run.body.items).toEqual(['CD-01']);
    expect(run.body.detail).toContain('never assumed');
    const [{ n: after }] = await t.ds.query('SELECT count(*)::int AS n FROM adjustment_run');
    expect(after).toBe(before);
    const fixed = await request(t.app).put(`/api/v1/network/benchmarks/${cd01.id}`).set(bearer(coordinator)).send(asInput(cd01, 'zero-tide'));
    expect(fixed.body.knownTideSystem).toBe('zero-tide');
    const [row] = await t.ds.query("SELECT known_tide_system FROM benchmark WHERE code = 'CD-01'");
    expect(row.known_tide_system).toBe('zero-tide');
    const ok = await request(t.app).post('/api/v1/network/runs').set(bearer(coordinator)).send({});
    expect(ok.status).toBe(202);
  });

  it('refuses an unknown tide system name with 400 naming the field', async () => {
    const cd01 = await benchmark('CD-01');
    const bad = await request(t.app).put(`/api/v1/network/benchmarks/${cd01.id}`).set(bearer(coordinator)).send(asInput(cd01, 'half-tide'));
    expect(bad.status).toBe(400);
    expect(bad.body.issues[0].path).toBe('body.known.tideSystem');
  });
});

describe('tide systems of site heights and grids', () => {
  it('a site stores the crust system of h and the tide system of an entered ζ; unstated stays null', async () => {
    const base = {
      name: 'Tide test site', referencePoint: 'a mark', crs: 'EPSG:4937', coordinates: [10.9, 54.2, 50], ellipsoidalHeightUncertaintyM: 0.01,
      quasigeoid: { source: 'entered', heightM: 39.4, uncertaintyM: 0.02, tideSystem: 'zero-tide' }, ellipsoidalCrustSystem: 'tide-free', benchmarkTie: null,
    };
    const res = await request(t.app).post('/api/v1/sites').set(bearer(operator)).send(base);
    expect(res.status).toBe(201);
    expect(res.body.ellipsoidalCrustSystem).toBe('tide-free');
    expect(res.body.quasigeoid.tideSystem).toBe('zero-tide');
    const [row] = await t.ds.query('SELECT ellipsoidal_crust_system, quasigeoid_tide_system FROM site WHERE id = $1', [res.body.id]);
    expect(row).toEqual({ ellipsoidal_crust_system: 'tide-free', quasigeoid_tide_system: 'zero-tide' });
    const bare = await request(t.app).post('/api/v1/sites').set(bearer(operator)).send({ ...base, name: 'Tide test site 2', ellipsoidalCrustSystem: undefined, quasigeoid: { source: 'entered', heightM: 39.4, uncertaintyM: 0.02 } });
    expect(bare.status).toBe(201);
    expect(bare.body.ellipsoidalCrustSystem).toBeNull();
    expect(bare.body.quasigeoid.tideSystem).toBeNull();
  });

  it('the demo grid states zero-tide and the default correlation length', async () => {
    const grids = await request(t.app).get('/api/v1/quasigeoid-grids').set(bearer(operator));
    expect(grids.body.items[0].tideSystem).toBe('zero-tide');
    expect(grids.body.items[0].correlationLengthKm).toBeNull();
  });
});
