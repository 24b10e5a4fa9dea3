import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { stopQueues } from '../../server/jobs/queue';
import { startWorker, type Worker } from '../../server/jobs/worker';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';

// A site's local tie may be given as Δh (m) or directly as ΔC = C(site) − C(benchmark) (m²/s²) with σ and a source.
// With C = W₀ − W (geopotential number; Torge & Müller, Geodesy, 4th ed. 2012, §3.4) the tie enters the adjustment
// as the observation C_site − C_bm: a ΔC tie as given, a Δh tie as γ·Δh.

let t: TestApp;
let worker: Worker;
let operator: string;
let coordinator: string;
let site: { id: string; name: string; benchmark_code: string; institute: string };
const bearer = (tok: string) => ({ authorization: `Bearer ${tok}` });

beforeAll(async () => {
  t = await createTestApp();
  worker = await startWorker({ dataSource: t.ds, databaseUrl: t.databaseUrl, pollingIntervalSeconds: 0.5 });
  operator = await tokenFor(t, 'ines.varga@saltmarsh-lab.invalid');
  coordinator = await tokenFor(t, 'ansel.brandt@geopotential-office.invalid');
  site = (await t.ds.query(`SELECT s.id, s.name, s.benchmark_code, i.code AS institute FROM site s JOIN institute i ON i.id = s.institute_id
    WHERE i.code = 'SCL' AND s.benchmark_code IS NOT NULL ORDER BY s.name LIMIT 1`))[0];
});
afterAll(async () => {
  await worker?.stop();
  await stopQueues();
  await t?.close();
});

async function adjust() {
  const start = await request(t.app).post('/api/v1/network/runs').set(bearer(coordinator)).send({ sigmaMmPerSqrtKm: 1 });
  expect(start.status).toBe(202);
  let run = start.body;
  for (let i = 0; i < 160 && !['done', 'failed'].includes(run.state); i++) {
    await new Promise((r) => setTimeout(r, 250));
    run = (await request(t.app).get(`/api/v1/network/runs/${start.body.id}`).set(bearer(coordinator))).body;
  }
  expect(run.state).toBe('done');
  return run.result.observations.find((o: { id?: string; kind: string; to: string }) => o.kind === 'tie' && o.to === `site:${site.id}`);
}

describe('local tie given as ΔC', () => {
  it('refuses a ΔC tie without a source, or one with both Δh and ΔC, naming the field and storing nothing', async () => {
    const before = (await t.ds.query('SELECT tie_height_difference_m, tie_delta_c_m2s2 FROM site WHERE id = $1', [site.id]))[0];
    const noSource = await request(t.app).patch(`/api/v1/sites/${site.id}`).set(bearer(operator))
      .send({ benchmarkTie: { benchmarkCode: site.benchmark_code, deltaC_m2s2: 12.5, uncertaintyC_m2s2: 0.02 } });
    expect(noSource.status).toBe(400);
    expect(noSource.body.issues.map((i: { path: string }) => i.path)).toContain('body.benchmarkTie.source');
    const both = await request(t.app).patch(`/api/v1/sites/${site.id}`).set(bearer(operator))
      .send({ benchmarkTie: { benchmarkCode: site.benchmark_code, heightDifferenceM: 1, uncertaintyM: 0.001, deltaC_m2s2: 9.8, uncertaintyC_m2s2: 0.01, source: 'x survey' } });
    expect(both.status).toBe(400);
    expect(both.body.issues.map((i: { path: string }) => i.path)).toContain('body.benchmarkTie.heightDifferenceM');
    const after = (await t.ds.query('SELECT tie_height_difference_m, tie_delta_c_m2s2 FROM site WHERE id = $1', [site.id]))[0];
    expect(after).toEqual(before);
  });

  it('stores a ΔC tie with σ and source, answers it on the site, and the adjustment uses ΔC as given', async () => {
    // A Δh tie first: the observation is γ·Δh with γ the GRS80 normal gravity, 9.78–9.84 m/s² at the surface
    // (Moritz, Geodetic Reference System 1980, J Geod 74 (2000), γₑ = 9.7803267715, γₚ = 9.8321863685 m/s²).
    const dh = await request(t.app).patch(`/api/v1/sites/${site.id}`).set(bearer(operator))
      .send({ benchmarkTie: { benchmarkCode: site.benchmark_code, heightDifferenceM: 2, uncertaintyM: 0.001, source: 'levelling file LV-17' } });
    expect(dh.status, JSON.stringify(dh.body)).toBe(200);
    expect(dh.body.benchmarkTie).toMatchObject({ quantity: 'height', heightDifferenceM: 2, deltaC_m2s2: null, source: 'levelling file LV-17' });
    const byHeight = await adjust();
    expect(byHeight.deltaC_m2s2 / 2).toBeGreaterThan(9.78);
    expect(byHeight.deltaC_m2s2 / 2).toBeLessThan(9.84);

    const res = await request(t.app).patch(`/api/v1/sites/${site.id}`).set(bearer(operator))
      .send({ benchmarkTie: { benchmarkCode: site.benchmark_code, deltaC_m2s2: 12.5, uncertaintyC_m2s2: 0.02, source: 'GNSS/levelling tie report 2026-04, table 3' } });
    expect(res.status, JSON.stringify(res.body)).toBe(200);
    expect(res.body.benchmarkTie).toEqual({
      benchmarkCode: site.benchmark_code, quantity: 'potential', heightDifferenceM: null, uncertaintyM: null,
      deltaC_m2s2: 12.5, uncertaintyC_m2s2: 0.02, source: 'GNSS/levelling tie report 2026-04, table 3',
    });
    const [row] = await t.ds.query('SELECT tie_height_difference_m AS dh, tie_u_m AS u, tie_delta_c_m2s2 AS dc, tie_u_c_m2s2 AS uc, tie_source AS src FROM site WHERE id = $1', [site.id]);
    expect(row).toEqual({ dh: null, u: null, dc: 12.5, uc: 0.02, src: 'GNSS/levelling tie report 2026-04, table 3' });
    const audit: { details: { changed: string[] } }[] = await t.ds.query("SELECT details FROM audit_event WHERE action = 'site.updated' AND entity_id = $1", [site.id]);
    expect(audit.some((a) => a.details.changed.includes('benchmarkTie'))).toBe(true);
    expect(audit.length).toBeGreaterThan(0);

    const obs = await adjust();
    // The ΔC tie is the observation itself: not multiplied by γ, σ as entered (above the 0.1 mm·γ floor).
    expect(obs.deltaC_m2s2).toBe(12.5);
    expect(obs.sigma_m2s2).toBeCloseTo(0.02, 12);
    expect(obs.label).toContain(site.benchmark_code);
  });
});
