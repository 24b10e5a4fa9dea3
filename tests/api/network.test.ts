import { inverse, Matrix } from 'ml-matrix';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { stopQueues } from '../../server/jobs/queue';
import { startWorker, type Worker } from '../../server/jobs/worker';
import { adjustmentThreadCount } from '../../server/network/adjustment-thread';
import { chiSquareQuantile } from '../../server/science/distributions';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';

// The levelling network API against a real PostgreSQL with the demo network seeded, and a pg-boss worker on the
// same test database (the HTTP route only enqueues; the worker adjusts).

let t: TestApp;
let worker: Worker;
let coordinator: string;
let operator: string;
let auditor: string;
const bearer = (tok: string) => ({ authorization: `Bearer ${tok}` });

/** Permanent-tide potential γ0(φ)·(0.099 − 0.296 sin²φ) [m²/s²] (Ekman 1989), γ0 by Somigliana with GRS80 (Moritz 2000). */
function permanentTide(latDeg: number): number {
  const s2 = Math.sin((latDeg * Math.PI) / 180) ** 2;
  const gamma = (9.7803267715 * (1 + 0.001931851353 * s2)) / Math.sqrt(1 - 0.00669438002290 * s2);
  return gamma * (0.099 - 0.296 * s2);
}
/** C_system − C_mean-tide at one point (Ekman 1989; Mäkinen & Ihde 2009, 1 + k − h = 0.68). */
const shiftFromMean = (system: string, lat: number) => (system === 'zero-tide' ? permanentTide(lat) : system === 'tide-free' ? 0.68 * permanentTide(lat) : 0);

type RunObs = { kind: string; from: string; to: string; sigma_m2s2: number; suspected: boolean };
type RunPoint = { code: string; datum: string; c_m2s2: number };
/** σ(C_b − C_a) from a run's own observations by dense least squares (ml-matrix): √(q_aa + q_bb − 2q_ab). */
function denseDifferenceSigma(result: { points: RunPoint[]; observations: RunObs[] }, a: string, b: string): number {
  const free = result.points.filter((p) => p.datum !== 'held').map((p) => p.code);
  const obs = result.observations.filter((o) => !o.suspected);
  const A = new Matrix(obs.length, free.length);
  obs.forEach((o, i) => {
    if (free.includes(o.to)) A.set(i, free.indexOf(o.to), 1);
    if (free.includes(o.from)) A.set(i, free.indexOf(o.from), -1);
  });
  const P = Matrix.diag(obs.map((o) => 1 / o.sigma_m2s2 ** 2));
  const Q = inverse(A.transpose().mmul(P).mmul(A));
  const q = (x: string, y: string) => (free.includes(x) && free.includes(y) ? Q.get(free.indexOf(x), free.indexOf(y)) : 0);
  return Math.sqrt(q(a, a) + q(b, b) - 2 * q(a, b));
}

beforeAll(async () => {
  t = await createTestApp();
  worker = await startWorker({ dataSource: t.ds, databaseUrl: t.databaseUrl, pollingIntervalSeconds: 0.5 });
  coordinator = await tokenFor(t, 'ansel.brandt@geopotential-office.invalid');
  operator = await tokenFor(t, 'ines.varga@saltmarsh-lab.invalid');
  auditor = await tokenFor(t, 'petra.lind@audit-bureau.invalid');
});
afterAll(async () => {
  await worker?.stop();
  await stopQueues();
  await t?.close();
});

async function datumId(name: string): Promise<string> {
  const res = await request(t.app).get('/api/v1/network/datums').set(bearer(auditor));
  return res.body.items.find((d: { name: string }) => d.name === name).id;
}

describe('datums and benchmarks', () => {
  it('lists the two invented datums with their tide systems', async () => {
    const res = await request(t.app).get('/api/v1/network/datums').set(bearer(auditor));
    expect(res.status).toBe(200);
    expect(res.body.items.map((d: { name: string; tideSystem: string }) => `${d.name}/${d.tideSystem}`).sort()).toEqual(['Coastal Datum 1987/zero-tide', 'Highland Datum 2004/mean-tide']);
  });

  it('creates a datum and a benchmark entered as normal height in UTM, stores entered and GRS80 values', async () => {
    const d = await request(t.app).post('/api/v1/network/datums').set(bearer(coordinator)).send({ name: 'Test Datum', tideSystem: 'tide-free', realisationEpoch: '2020.0' });
    expect(d.status).toBe(201);
    expect(d.body.loopToleranceMmPerSqrtKm).toBe(4);
    // EPSG Guidance Note 7-2 style: E 500000 on the central meridian (9°E for zone 32) — the longitude must come back as 9°.
    const b = await request(t.app).post('/api/v1/network/benchmarks').set(bearer(coordinator)).send({
      code: 'T-1', name: 'Test bolt', datumId: d.body.id, crs: 'EPSG:25832', coordinates: [500000, 6000000], known: { kind: 'H', value: 100, uncertainty: 0.002 }, fixed: true,
    });
    expect(b.status).toBe(201);
    expect(b.body.longitudeDeg).toBeCloseTo(9, 9); // UTM central meridian of zone 32 (definition of UTM)
    // C = H·γ̄ with γ̄ between GRS80 equatorial and polar normal gravity, 9.7803–9.8322 m/s² (Moritz 2000, J Geod 74).
    expect(b.body.knownC_m2s2 / 100).toBeGreaterThan(9.7803);
    expect(b.body.knownC_m2s2 / 100).toBeLessThan(9.8322);
    const [row] = await t.ds.query('SELECT crs, coordinates_entered, known_entered_as, fixed FROM benchmark WHERE code = $1', ['T-1']);
    expect(row).toEqual({ crs: 'EPSG:25832', coordinates_entered: [500000, 6000000], known_entered_as: 'H', fixed: true });
    const dup = await request(t.app).post('/api/v1/network/benchmarks').set(bearer(coordinator)).send({ code: 'T-1', name: 'again', datumId: d.body.id, crs: 'EPSG:4937', coordinates: [9, 54] });
    expect(dup.status).toBe(409);
    const bad = await request(t.app).post('/api/v1/network/benchmarks').set(bearer(coordinator)).send({ code: 'T-2', name: 'x', datumId: d.body.id, crs: 'EPSG:99999', coordinates: [9, 54] });
    expect(bad.status).toBe(400);
    expect(bad.body.issues[0].path).toBe('body.crs');
  });

  it('refuses writes by lab staff and auditors', async () => {
    for (const tok of [operator, auditor]) {
      const res = await request(t.app).post('/api/v1/network/datums').set(bearer(tok)).send({ name: 'X', tideSystem: 'mean-tide' });
      expect(res.status).toBe(403);
    }
  });

  it('pages, sorts and filters benchmarks on the server', async () => {
    const res = await request(t.app).get('/api/v1/network/benchmarks?pageSize=5&sort=code&order=desc&q=HD-').set(bearer(auditor));
    expect(res.status).toBe(200);
    expect(res.body.items).toHaveLength(5);
    expect(res.body.total).toBe(14);
    const codes = res.body.items.map((b: { code: string }) => b.code);
    expect(codes).toEqual([...codes].sort().reverse());
  });
});

describe('levelling sections CSV', () => {
  const upload = (csv: string, preview = false) =>
    request(t.app).post(`/api/v1/network/sections/upload?preview=${preview}`).set(bearer(coordinator)).attach('file', Buffer.from(csv), 'sections.csv');

  it('names the first bad line and column and stores nothing', async () => {
    const before = (await t.ds.query('SELECT count(*)::int AS n FROM levelling_section'))[0].n;
    const csv = 'line,from,to,delta_h_m,length_km\nTest,CD-01,CD-05,1.234,3.1\nTest,CD-05,CD-09,2.5x,3.3\nTest,CD-09,CD-10,0.5,2\n';
    const res = await upload(csv);
    expect(res.status).toBe(400);
    expect(res.body.issues[0]).toMatchObject({ line: 3, column: 'delta_h_m' });
    expect(res.body.detail).toContain('Line 3, column delta_h_m');
    const unknown = await upload('line,from,to,delta_h_m,length_km\nTest,CD-01,CD-05,1.234,3.1\nTest,CD-05,NOPE-1,2.5,3.3\n');
    expect(unknown.status).toBe(400);
    expect(unknown.body.issues[0]).toMatchObject({ line: 3, column: 'to' });
    const missing = await upload('line,from,delta_h_m,length_km\nT,CD-01,1,2\n');
    expect(missing.status).toBe(400);
    expect(missing.body.issues[0]).toMatchObject({ line: 1, column: 'to' });
    expect((await t.ds.query('SELECT count(*)::int AS n FROM levelling_section'))[0].n).toBe(before);
  });

  it('previews without storing, then stores in one go, flags run differences and refuses the same file twice', async () => {
    const before = (await t.ds.query('SELECT count(*)::int AS n FROM levelling_section'))[0].n;
    // forward + backward = 12 mm on 4 km against 4 mm·√4 = 8 mm (FGCC 1984 first-order class II section, from memory).
    const csv = '# test upload\nline,from,to,delta_h_m,length_km,mean_gravity_ms2,observed_on,forward_m,backward_m\nDiagonal,CD-01,CD-06,,4,,2024-05-01,3.010,-2.998\nDiagonal,CD-06,CD-11,0.7,5.5,9.8141,2024-05-02,,\n';
    const pre = await upload(csv, true);
    expect(pre.status).toBe(200);
    expect(pre.body.stored).toBe(false);
    expect(pre.body.rows[0]).toMatchObject({ line: 3, gravityFromNormal: true, runCheckPassed: false, deltaHeightM: 3.004 });
    expect(pre.body.warnings[0].line).toBe(3);
    expect((await t.ds.query('SELECT count(*)::int AS n FROM levelling_section'))[0].n).toBe(before);
    const res = await upload(csv);
    expect(res.status).toBe(201);
    const rows = await t.ds.query('SELECT line_name, gravity_from_normal, mean_gravity_ms2, upload_sha256 FROM levelling_section WHERE line_name = $1 ORDER BY created_at', ['Diagonal']);
    expect(rows).toHaveLength(2);
    expect(rows[0].gravity_from_normal).toBe(true);
    expect(rows[1].mean_gravity_ms2).toBe(9.8141);
    expect(rows[0].upload_sha256).toBe(res.body.sha256);
    expect((await upload(csv)).status).toBe(409);
    // clean up so the loop and run tests see the demo network only
    await t.ds.query("DELETE FROM levelling_section WHERE line_name = 'Diagonal'");
  });
});

describe('loops', () => {
  it('reports the loops through the planted blunder as failing, failing loops first', async () => {
    const id = await datumId('Coastal Datum 1987');
    const res = await request(t.app).get(`/api/v1/network/loops?datumId=${id}`).set(bearer(auditor));
    expect(res.status).toBe(200);
    expect(res.body.failing).toBeGreaterThan(0);
    expect(res.body.loops[0].passed).toBe(false);
    expect(res.body.loops[0].sections.some((s: { lineName: string }) => s.lineName === 'Dune road')).toBe(true);
    // tolerance t·√L (FGCC 1984 §3.5), tolerance coefficient t = 4 mm/√km set on the datum
    const l = res.body.loops[0];
    expect(l.toleranceMm).toBeCloseTo(4 * Math.sqrt(l.lengthKm), 9);
    const firstPassing = res.body.loops.findIndex((x: { passed: boolean }) => x.passed);
    expect(res.body.loops.slice(firstPassing).every((x: { passed: boolean }) => x.passed)).toBe(true);
    // independent loops = sections − points + parts (Euler's formula for graphs; Paton 1969):
    // 17 lattice sections + 4 to the lab benchmark and the southern line; 12 + 1 + 2 points; one part
    expect(res.body.independentLoops).toBe(21 - 15 + 1);
  });
});

describe('adjustment runs through the job queue', () => {
  it('enqueues (202), the worker adjusts, results are stored and the blunder is suspected', async () => {
    const start = await request(t.app).post('/api/v1/network/runs').set(bearer(coordinator)).send({ sigmaMmPerSqrtKm: 1 });
    expect(start.status).toBe(202);
    expect(start.body.state).toBe('queued');
    let run = start.body;
    for (let i = 0; i < 120 && !['done', 'failed'].includes(run.state); i++) {
      await new Promise((r) => setTimeout(r, 250));
      run = (await request(t.app).get(`/api/v1/network/runs/${start.body.id}`).set(bearer(auditor))).body;
    }
    expect(run.state).toBe('done');
    expect(run.progress).toBe(1);
    const r = run.result;
    // Σ redundancy numbers = degrees of freedom (trace of the redundancy matrix; Ghilani 2017 ch. 21)
    expect(r.redundancySum).toBeCloseTo(r.degreesOfFreedom, 8);
    // Baarda's iteration removed the planted blunder: the final adjustment has one observation less.
    expect(r.degreesOfFreedom).toBe(r.observations.filter((o: { suspected: boolean }) => !o.suspected).length - r.unknowns);
    expect(r.snooping.suspects[0]).toMatchObject({ step: 1 });
    expect(r.snooping.suspects[0].label).toContain('Dune road');
    expect(r.snooping.initial.globalTestPassed).toBe(false);
    // Baarda's w-test critical value for α0 = 0.001 two-sided: 3.29 (normal quantile, standard table)
    expect(r.snooping.criticalValue).toBeCloseTo(3.29, 2);
    const worst = [...r.observations].sort((a, b) => Math.abs(b.standardizedResidual ?? 0) - Math.abs(a.standardizedResidual ?? 0))[0];
    expect(worst.label).toContain('Dune road');
    expect(worst.suspected).toBe(true);
    // Global test, α = 0.05: upper bound is the χ² quantile at 0.975 with dof (common statistical table)
    expect(r.globalTest.critical).toBeCloseTo(chiSquareQuantile(0.975, r.degreesOfFreedom), 9);
    const [row] = await t.ds.query('SELECT state, degrees_of_freedom, suspects, result IS NOT NULL AS has FROM adjustment_run WHERE id = $1', [run.id]);
    expect(row).toEqual({ state: 'done', degrees_of_freedom: r.degreesOfFreedom, suspects: r.snooping.suspects.length, has: true });
    // durable progress in job_progress, and the run's worker thread is gone
    const [progress] = await t.ds.query("SELECT stage, fraction FROM job_progress WHERE kind = 'adjustment-run' AND subject_id = $1", [run.id]);
    expect(progress).toEqual({ stage: 'finished', fraction: 1 });
    expect(adjustmentThreadCount()).toBe(0);
    await expect(t.ds.query("UPDATE adjustment_run SET stage = 'x' WHERE id = $1", [run.id])).rejects.toThrow(/cannot be changed/);
    await expect(t.ds.query('DELETE FROM adjustment_run WHERE id = $1', [run.id])).rejects.toThrow(/kept for good/);
  });

  it('answers 422 naming the part of the network that reaches no fixed benchmark', async () => {
    const d = await datumId('Highland Datum 2004');
    for (const code of ['ISO-1', 'ISO-2']) {
      const b = await request(t.app).post('/api/v1/network/benchmarks').set(bearer(coordinator)).send({ code, name: code, datumId: d, crs: 'EPSG:4937', coordinates: [10.9, 51.1, 400] });
      expect(b.status).toBe(201);
    }
    const s = await request(t.app).post('/api/v1/network/sections').set(bearer(coordinator)).send({ fromCode: 'ISO-1', toCode: 'ISO-2', deltaHeightM: 1.5, lengthKm: 2 });
    expect(s.status).toBe(201);
    const runsBefore = (await t.ds.query('SELECT count(*)::int AS n FROM adjustment_run'))[0].n;
    const res = await request(t.app).post('/api/v1/network/runs').set(bearer(coordinator)).send({});
    expect(res.status).toBe(422);
    expect(res.headers['content-type']).toContain('application/problem+json');
    expect(res.body.parts[0].codes.sort()).toEqual(['ISO-1', 'ISO-2']);
    expect(res.body.detail).toContain('ISO-1');
    expect((await t.ds.query('SELECT count(*)::int AS n FROM adjustment_run'))[0].n).toBe(runsBefore);
    await request(t.app).delete(`/api/v1/network/sections/${s.body.id}`).set(bearer(coordinator)).expect(204);
  });
});

describe('POST /api/v1/calc/adjust', () => {
  // Small network: A held at 100, B, C, D free; six observations with different σ.
  const points = [{ code: 'A', fixedC: 100 }, { code: 'B' }, { code: 'C' }, { code: 'D' }];
  const observations = [
    { from: 'A', to: 'B', deltaC: 10.012, sigma: 0.01 },
    { from: 'B', to: 'C', deltaC: 5.004, sigma: 0.012 },
    { from: 'C', to: 'D', deltaC: -3.001, sigma: 0.01 },
    { from: 'D', to: 'A', deltaC: -12.02, sigma: 0.015 },
    { from: 'A', to: 'C', deltaC: 15.0, sigma: 0.02 },
    { from: 'B', to: 'D', deltaC: 1.995, sigma: 0.014 },
  ];

  it('agrees with a dense least-squares solution computed with ml-matrix', async () => {
    const res = await request(t.app).post('/api/v1/calc/adjust').set(bearer(operator)).send({ points, observations });
    expect(res.status).toBe(200);
    // Reference: ml-matrix (npm, general linear algebra), normal equations N = AᵀPA, x = N⁻¹AᵀPl (Ghilani 2017 ch. 12).
    const unknowns = ['B', 'C', 'D'];
    const A = new Matrix(observations.length, 3);
    const l: number[] = [];
    const P = Matrix.zeros(observations.length, observations.length);
    observations.forEach((o, i) => {
      const j = unknowns.indexOf(o.to);
      const k = unknowns.indexOf(o.from);
      if (j >= 0) A.set(i, j, 1);
      if (k >= 0) A.set(i, k, -1);
      l.push(o.deltaC + (o.from === 'A' ? 100 : 0) - (o.to === 'A' ? 100 : 0));
      P.set(i, i, 1 / o.sigma ** 2);
    });
    const L = Matrix.columnVector(l);
    const Qxx = inverse(A.transpose().mmul(P).mmul(A));
    const x = Qxx.mmul(A.transpose().mmul(P).mmul(L));
    const v = A.mmul(x).sub(L);
    const vtpv = v.transpose().mmul(P).mmul(v).get(0, 0);
    unknowns.forEach((u, j) => {
      const p = res.body.points.find((q: { code: string }) => q.code === u);
      expect(p.c).toBeCloseTo(x.get(j, 0), 9);
      expect(p.sigma).toBeCloseTo(Math.sqrt(Qxx.get(j, j)), 9);
    });
    const Qll = A.mmul(Qxx).mmul(A.transpose());
    observations.forEach((o, i) => {
      const got = res.body.observations[i];
      expect(got.residual).toBeCloseTo(v.get(i, 0), 9);
      const r = 1 - Qll.get(i, i) / o.sigma ** 2;
      expect(got.redundancy).toBeCloseTo(r, 9);
      expect(got.standardizedResidual).toBeCloseTo(v.get(i, 0) / (o.sigma * Math.sqrt(r)), 6);
    });
    expect(res.body.degreesOfFreedom).toBe(3);
    expect(res.body.sigma0).toBeCloseTo(Math.sqrt(vtpv / 3), 9);
    expect(res.body.globalTest.statistic).toBeCloseTo(vtpv, 9);
  });

  it('answers 400 with field paths for bad input and 422 for a disconnected part', async () => {
    const bad = await request(t.app).post('/api/v1/calc/adjust').set(bearer(operator)).send({ points, observations: [{ from: 'A', to: 'B', deltaC: 'x', sigma: -1 }] });
    expect(bad.status).toBe(400);
    expect(bad.body.issues.map((i: { path: string }) => i.path)).toEqual(expect.arrayContaining(['body.observations.0.deltaC', 'body.observations.0.sigma']));
    const unknown = await request(t.app).post('/api/v1/calc/adjust').set(bearer(operator)).send({ points, observations: [{ from: 'A', to: 'Z', deltaC: 1, sigma: 1 }] });
    expect(unknown.status).toBe(400);
    expect(unknown.body.issues[0].path).toBe('body.observations.0.to');
    const cut = await request(t.app).post('/api/v1/calc/adjust').set(bearer(operator)).send({
      points: [...points, { code: 'E' }, { code: 'F' }], observations: [...observations, { from: 'E', to: 'F', deltaC: 1, sigma: 0.01 }],
    });
    expect(cut.status).toBe(422);
    expect(cut.body.parts[0].codes.sort()).toEqual(['E', 'F']);
  });
});

describe('clocks in the network: reconciliation and datum offsets', () => {
  it('gives no E_n across datums no levelling connects, estimates their offset, and compares (E_n) once levelling joins them', async () => {
    const [campaign] = await t.ds.query(`
      SELECT c.id, ca.site_id AS a, cb.site_id AS b FROM campaign c JOIN clock ca ON ca.id = c.clock_a_id JOIN clock cb ON cb.id = c.clock_b_id
      WHERE c.state IN ('accepted','certified') ORDER BY c.period_end DESC LIMIT 1`);
    expect(campaign).toBeDefined();
    // Keep this the only clock observation: the demo's other accepted or certified campaigns go back to review in
    // this test's own database, so the offset below comes from one link alone.
    await t.ds.query(`UPDATE campaign SET state = 'in_review' WHERE state IN ('accepted','certified') AND id <> $1`, [campaign.id]);
    // A levelling-only run to compare with.
    const lev = await request(t.app).post('/api/v1/network/runs').set(bearer(coordinator)).send({ includeClocks: false });
    expect(lev.status).toBe(202);
    let run = lev.body;
    for (let i = 0; i < 120 && run.state !== 'done'; i++) {
      await new Promise((r) => setTimeout(r, 250));
      run = (await request(t.app).get(`/api/v1/network/runs/${lev.body.id}`).set(bearer(auditor))).body;
    }
    const ca = run.result.points.find((p: { code: string }) => p.code === `site:${campaign.a}`);
    const cb = run.result.points.find((p: { code: string }) => p.code === `site:${campaign.b}`);
    expect(ca && cb).toBeTruthy();
    const levelled = cb.c_m2s2 - ca.c_m2s2;
    // An invented clock result: the levelled ΔC less 1.5 m²/s² (about the planted 0.15 m datum excess), u = 0.05 m²/s².
    const clockDeltaC = levelled - 1.5;
    await t.ds.query(
      `INSERT INTO comparison_result (campaign_id, input_hash, constants, software_version, computed_at, computed_by, result)
       VALUES ($1, $2, '{}'::jsonb, 'test', now(), 'test', $3::jsonb)`,
      [campaign.id, 'a'.repeat(64), JSON.stringify({ deltaC_m2s2: { value: clockDeltaC, standardUncertainty: 0.05, expandedUncertainty: 0.1, coverageFactor: 2 }, tide: { system: 'mean-tide' } })],
    );
    const rec = (await request(t.app).get('/api/v1/network/reconciliation').set(bearer(auditor))).body;
    const row = rec.rows.find((r: { campaignId: string }) => r.campaignId === campaign.id);
    expect(row.levellingDeltaC_m2s2).toBeCloseTo(levelled, 9);
    expect(row.clockExpandedU_m2s2).toBeCloseTo(0.1, 12);
    // The demo's two datums are joined by no levelling section: the levelled ΔC holds the unknown datum offset, so
    // E_n would test that offset, not the clocks (common practice: a comparison needs a common reference).
    expect(row.crossesDatums).toBe(true);
    expect(row.fromDatum).not.toBe(row.toDatum);
    expect(row.comparable).toBe(false);
    expect(row.verdict).toBe('not-comparable');
    expect(row.en).toBeNull();
    expect(row.agreed).toBeNull();
    // The levelled ΔC is converted from the datums' tide systems to the clock's (mean-tide) before the difference:
    // ΔC_lev(mean) = ΔC_lev − [s_B(B) − s_A(A)] (Ekman 1989), s the shift of C from mean-tide at each site.
    const latA = ca.latitudeDeg;
    const latB = cb.latitudeDeg;
    expect(row.tide.clockSystem).toBe('mean-tide');
    expect(row.tide.comparedIn).toBe('mean-tide');
    const levShift = -(shiftFromMean(row.tide.toDatumSystem, latB) - shiftFromMean(row.tide.fromDatumSystem, latA));
    expect(row.tide.levellingShift_m2s2).toBeCloseTo(levShift, 6);
    expect(Math.abs(levShift)).toBeGreaterThan(0.5); // one zero-tide, one mean-tide datum: ≈ 9 cm at 54°N
    expect(row.difference_m2s2).toBeCloseTo(-1.5 - levShift, 6);
    expect(row.note).toContain('not connected by levelling');
    // The site name is shown once (it already carries the institute code in the demo).
    expect(row.fromSite).not.toMatch(/^(\w+) \1 /);
    expect(row.toSite).not.toMatch(/^(\w+) \1 /);

    // With the clock as an observation and an offset parameter, the offset takes up the whole discrepancy (one clock
    // link between two otherwise separate datums has redundancy 0), so it equals clock − levelled ΔC.
    const withClocks = await request(t.app).post('/api/v1/network/runs').set(bearer(coordinator)).send({ includeClocks: true });
    expect(withClocks.status).toBe(202);
    let run2 = withClocks.body;
    for (let i = 0; i < 120 && run2.state !== 'done' && run2.state !== 'failed'; i++) {
      await new Promise((r) => setTimeout(r, 250));
      run2 = (await request(t.app).get(`/api/v1/network/runs/${withClocks.body.id}`).set(bearer(auditor))).body;
    }
    expect(run2.state).toBe('done');
    expect(run2.inputSummary.clocks).toBe(1);
    expect(run2.result.datumOffsets).toHaveLength(1);
    // One offset per datum against the reference datum (the datum of the first fixed benchmark, CD-01's coastal one):
    // o = C in that datum − C in the reference = levelled − clock ΔC, the clock converted to the datums' tide systems.
    const off = run2.result.datumOffsets[0];
    expect(run2.result.referenceDatum).toBe('Coastal Datum 1987');
    expect(off.name).toBe('Highland Datum 2004 relative to Coastal Datum 1987');
    const highlandIsTo = row.toDatum === 'Highland Datum 2004';
    expect(off.value_m2s2).toBeCloseTo(highlandIsTo ? 1.5 + levShift : -(1.5 + levShift), 6);
    expect(run2.result.tideConversions.map((c: { label: string }) => c.label)).toEqual(expect.arrayContaining([expect.stringContaining('HD-01')]));
    const rec2 = (await request(t.app).get('/api/v1/network/reconciliation').set(bearer(auditor))).body;
    expect(rec2.datumOffsets[0].value_m2s2).toBeCloseTo(off.value_m2s2, 9);

    // Once a section joins the two sites' tie benchmarks, the levelling connects the datums: E_n becomes meaningful.
    const tieFrom = (site: string) => run.result.observations.find((o: { kind: string; to: string }) => o.kind === 'tie' && o.to === `site:${site}`).from;
    // A junction consistent with both datums' fixed values (so data snooping keeps it): ΔC = C(bm B) − C(bm A) of the run.
    const cOf = (code: string) => run.result.points.find((p: { code: string }) => p.code === code).c_m2s2;
    const joined = await request(t.app).post('/api/v1/network/sections').set(bearer(coordinator))
      .send({ lineName: 'Datum junction', fromCode: tieFrom(campaign.a), toCode: tieFrom(campaign.b), deltaHeightM: (cOf(tieFrom(campaign.b)) - cOf(tieFrom(campaign.a))) / 9.81, lengthKm: 300, meanGravity_ms2: 9.81 });
    expect(joined.status).toBe(201);
    const lev2 = await request(t.app).post('/api/v1/network/runs').set(bearer(coordinator)).send({ includeClocks: false });
    let run3 = lev2.body;
    for (let i = 0; i < 120 && run3.state !== 'done' && run3.state !== 'failed'; i++) {
      await new Promise((r) => setTimeout(r, 250));
      run3 = (await request(t.app).get(`/api/v1/network/runs/${lev2.body.id}`).set(bearer(auditor))).body;
    }
    expect(run3.state).toBe('done');
    const c3a = run3.result.points.find((p: { code: string }) => p.code === `site:${campaign.a}`);
    const c3b = run3.result.points.find((p: { code: string }) => p.code === `site:${campaign.b}`);
    const levelled3 = c3b.c_m2s2 - c3a.c_m2s2 + levShift;
    const rec3 = (await request(t.app).get('/api/v1/network/reconciliation').set(bearer(auditor))).body;
    const row3 = rec3.rows.find((r: { campaignId: string }) => r.campaignId === campaign.id);
    expect(row3.comparable).toBe(true);
    expect(row3.levellingDeltaC_m2s2).toBeCloseTo(levelled3 - levShift, 9);
    // Levelling U (k = 2) from the covariance of the two adjusted sites, σ² = q_AA + q_BB − 2q_AB (JCGM 100:2008 eq. 13),
    // checked by dense least squares over the run's own observations; the root-sum-square would overstate it.
    expect(row3.levellingSigmaMethod).toBe('covariance');
    expect(run3.result.snooping.suspects.map((x: { label: string }) => x.label).join()).not.toContain('Datum junction');
    expect(run3.result.sigmaScale.applied).toBe(false);
    const sigma3 = denseDifferenceSigma(run3.result, c3a.code, c3b.code);
    expect(row3.levellingExpandedU_m2s2).toBeCloseTo(2 * sigma3, 9);
    expect(row3.levellingSigmaIgnoringCovariance_m2s2).toBeCloseTo(Math.hypot(c3a.sigmaC_m2s2, c3b.sigmaC_m2s2), 9);
    expect(row3.levellingExpandedU_m2s2).toBeLessThan(2 * Math.hypot(c3a.sigmaC_m2s2, c3b.sigmaC_m2s2));
    // E_n = (x_clock − x_lev) / √(U_clock² + U_lev²), expanded uncertainties k = 2 (ISO 13528:2015 §9.7 'E_n numbers', clause number from memory)
    const expectedEn = (clockDeltaC - levelled3) / Math.sqrt(0.1 ** 2 + row3.levellingExpandedU_m2s2 ** 2);
    expect(row3.en).toBeCloseTo(expectedEn, 9);
    expect(row3.agreed).toBe(Math.abs(expectedEn) <= 1);
    expect(row3.verdict).toBe(Math.abs(expectedEn) <= 1 ? 'agreed' : 'not-agreed');
    // The map's link carries the campaign's comparison.
    const map = (await request(t.app).get('/api/v1/network/map').set(bearer(auditor))).body;
    const link = map.links.find((l: { id: string }) => l.id === row3.linkId);
    expect(link.comparisons).toContainEqual({ campaignLabel: row3.campaignLabel, en: row3.en, verdict: row3.verdict });
  });
});
