import { inverse, Matrix } from 'ml-matrix';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';

// POST /api/v1/calc/adjust: covariance-based differences, clocks' shared systematics, Baarda's iterative snooping.
// Reference: dense generalised least squares with ml-matrix, x̂ = (AᵀΣ⁻¹A)⁻¹AᵀΣ⁻¹l with Σ = Σ_own + B·Σ_shared·Bᵀ
// (Koch 1999, Parameter Estimation and Hypothesis Testing in Linear Models, §3.2 — from memory).

let t: TestApp;
let operator: string;
const bearer = (tok: string) => ({ authorization: `Bearer ${tok}` });
beforeAll(async () => {
  t = await createTestApp();
  operator = await tokenFor(t, 'ines.varga@saltmarsh-lab.invalid');
});
afterAll(async () => {
  await t?.close();
});

type Obs = { from: string; to: string; deltaC: number; sigma: number; clocks?: { from: string; to: string } };
const points = [{ code: 'A', fixedC: 100 }, { code: 'B' }, { code: 'C' }, { code: 'D' }];
const unknowns = ['B', 'C', 'D'];

function gls(observations: Obs[], systematics: { clock: string; sigma: number }[]) {
  const n = observations.length;
  const A = new Matrix(n, unknowns.length);
  const B = new Matrix(n, Math.max(systematics.length, 1));
  const l: number[] = [];
  observations.forEach((o, i) => {
    const j = unknowns.indexOf(o.to);
    const k = unknowns.indexOf(o.from);
    if (j >= 0) A.set(i, j, 1);
    if (k >= 0) A.set(i, k, -1);
    l.push(o.deltaC + (o.from === 'A' ? 100 : 0) - (o.to === 'A' ? 100 : 0));
    if (o.clocks) {
      B.set(i, systematics.findIndex((s) => s.clock === o.clocks!.to), B.get(i, systematics.findIndex((s) => s.clock === o.clocks!.to)) + 1);
      B.set(i, systematics.findIndex((s) => s.clock === o.clocks!.from), B.get(i, systematics.findIndex((s) => s.clock === o.clocks!.from)) - 1);
    }
  });
  let Sigma = Matrix.diag(observations.map((o) => o.sigma ** 2));
  if (systematics.length) Sigma = Sigma.add(B.mmul(Matrix.diag(systematics.map((s) => s.sigma ** 2))).mmul(B.transpose()));
  const W = inverse(Sigma);
  const Q = inverse(A.transpose().mmul(W).mmul(A));
  const L = Matrix.columnVector(l);
  const x = Q.mmul(A.transpose().mmul(W).mmul(L));
  const v = A.mmul(x).sub(L);
  const omega = v.transpose().mmul(W).mmul(v).get(0, 0);
  const idx = (c: string) => unknowns.indexOf(c);
  const q = (a: string, b: string) => (idx(a) < 0 || idx(b) < 0 ? 0 : Q.get(idx(a), idx(b)));
  return { x, Q, omega, dof: n - unknowns.length, diffSigma: (f: string, to: string) => Math.sqrt(q(f, f) + q(to, to) - 2 * q(f, to)) };
}

const levelling: Obs[] = [
  { from: 'A', to: 'B', deltaC: 10.012, sigma: 0.01 },
  { from: 'B', to: 'C', deltaC: 5.004, sigma: 0.012 },
  { from: 'C', to: 'D', deltaC: -3.001, sigma: 0.01 },
  { from: 'D', to: 'A', deltaC: -12.02, sigma: 0.015 },
  { from: 'A', to: 'C', deltaC: 15.0, sigma: 0.02 },
  { from: 'B', to: 'D', deltaC: 1.995, sigma: 0.014 },
];

describe('POST /api/v1/calc/adjust contracts', () => {
  it('differences: σ = √(q_ff + q_tt − 2q_ft) on the a-priori scale, equal to dense least squares', async () => {
    const differences = [{ from: 'B', to: 'D' }, { from: 'A', to: 'C' }, { from: 'C', to: 'B' }];
    const res = await request(t.app).post('/api/v1/calc/adjust').set(bearer(operator)).send({ points, observations: levelling, differences });
    expect(res.status).toBe(200);
    const ref = gls(levelling, []);
    const c = (code: string) => res.body.points.find((p: { code: string }) => p.code === code).c;
    res.body.differences.forEach((d: { from: string; to: string; deltaC: number; sigma: number }, i: number) => {
      expect(d).toMatchObject(differences[i]);
      expect(d.deltaC).toBeCloseTo(c(d.to) - c(d.from), 12);
      expect(d.sigma).toBeCloseTo(ref.diffSigma(d.from, d.to), 10);
    });
    // Difference from the held point: its σ is the point's own σ.
    expect(res.body.differences[1].sigma).toBeCloseTo(res.body.points[2].sigma, 12);
  });

  it('clocks + clockSystematics: estimates, σ, σ̂0 and dof equal GLS with Σ = Σ_own + BΣ_sBᵀ', async () => {
    const systematics = [{ clock: 'Sr-A', sigma: 0.03 }, { clock: 'Yb-D', sigma: 0.05 }, { clock: 'Ca-C', sigma: 0.02 }];
    const clocks: Obs[] = [
      { from: 'A', to: 'D', deltaC: 12.01, sigma: 0.01, clocks: { from: 'Sr-A', to: 'Yb-D' } },
      { from: 'A', to: 'D', deltaC: 12.04, sigma: 0.012, clocks: { from: 'Sr-A', to: 'Yb-D' } },
      { from: 'A', to: 'D', deltaC: 12.02, sigma: 0.01, clocks: { from: 'Sr-A', to: 'Yb-D' } },
      { from: 'C', to: 'D', deltaC: -3.02, sigma: 0.015, clocks: { from: 'Ca-C', to: 'Yb-D' } },
    ];
    const observations = [...levelling, ...clocks];
    const res = await request(t.app).post('/api/v1/calc/adjust').set(bearer(operator)).send({ points, observations, clockSystematics: systematics, differences: [{ from: 'A', to: 'D' }] });
    expect(res.status).toBe(200);
    expect(res.body.snooping.removals).toEqual([]);
    const ref = gls(observations, systematics);
    unknowns.forEach((u, j) => {
      const p = res.body.points.find((q: { code: string }) => q.code === u);
      expect(p.c).toBeCloseTo(ref.x.get(j, 0), 9);
      expect(p.sigma).toBeCloseTo(Math.sqrt(ref.Q.get(j, j)), 10);
    });
    expect(res.body.degreesOfFreedom).toBe(ref.dof);
    expect(res.body.sigma0).toBeCloseTo(Math.sqrt(ref.omega / ref.dof), 9);
    expect(res.body.differences[0].sigma).toBeCloseTo(ref.diffSigma('A', 'D'), 10);
    expect(res.body.clockSystematics.map((c: { clock: string; observations: number }) => [c.clock, c.observations])).toEqual([['Sr-A', 3], ['Yb-D', 4], ['Ca-C', 1]]);
    // Treating the three repeated campaigns as independent (shared σ folded into each row) gives a smaller σ(A→D):
    const folded = clocks.map((o) => ({ from: o.from, to: o.to, deltaC: o.deltaC, sigma: Math.hypot(o.sigma, 0.03, 0.05) }));
    const indep = await request(t.app).post('/api/v1/calc/adjust').set(bearer(operator)).send({ points, observations: [...levelling, ...folded], differences: [{ from: 'A', to: 'D' }] });
    expect(indep.body.differences[0].sigma).toBeLessThan(res.body.differences[0].sigma);
  });

  it("suspected: true only for the observation Baarda's iteration removed; the removal order with w", async () => {
    const many: Obs[] = [...levelling, ...levelling.map((o) => ({ ...o, deltaC: o.deltaC + 0.002 })), { from: 'A', to: 'B', deltaC: 10.3, sigma: 0.01 }];
    const res = await request(t.app).post('/api/v1/calc/adjust').set(bearer(operator)).send({ points, observations: many });
    expect(res.status).toBe(200);
    const suspected = res.body.observations.map((o: { suspected: boolean }, i: number) => (o.suspected ? i : -1)).filter((i: number) => i >= 0);
    expect(suspected).toEqual([12]);
    expect(res.body.snooping.removals).toHaveLength(1);
    expect(res.body.snooping.removals[0]).toMatchObject({ step: 1, source: 'observation', index: 12, from: 'A', to: 'B' });
    // Critical value for α0 = 0.001 two-sided: 3.29 (standard normal table).
    expect(Math.abs(res.body.snooping.removals[0].standardizedResidual)).toBeGreaterThan(3.29);
    expect(res.body.observations[12].removedAtStep).toBe(1);
    // The final adjustment is the one without it.
    const without = await request(t.app).post('/api/v1/calc/adjust').set(bearer(operator)).send({ points, observations: many.slice(0, 12) });
    expect(res.body.points[1].c).toBeCloseTo(without.body.points[1].c, 10);
    expect(res.body.sigma0).toBeCloseTo(without.body.sigma0, 10);
  });

  it('answers 400 naming the field for an unknown clock or point in differences', async () => {
    const clock = await request(t.app).post('/api/v1/calc/adjust').set(bearer(operator)).send({
      points, observations: [...levelling, { from: 'A', to: 'B', deltaC: 10, sigma: 0.1, clocks: { from: 'X', to: 'Y' } }], clockSystematics: [{ clock: 'Y', sigma: 0.1 }],
    });
    expect(clock.status).toBe(400);
    expect(clock.body.issues[0].path).toBe('body.observations.6.clocks.from');
    const diff = await request(t.app).post('/api/v1/calc/adjust').set(bearer(operator)).send({ points, observations: levelling, differences: [{ from: 'A', to: 'Q' }] });
    expect(diff.status).toBe(400);
    expect(diff.body.issues[0].path).toBe('body.differences.0.to');
  });
});
