import { describe, expect, it } from 'vitest';
import { Matrix, inverse } from 'ml-matrix';
import {
  adjustNetwork,
  AdjustmentInputError,
  type AdjustmentInput,
  type NetworkObservation,
  type NetworkPoint,
} from '../../../server/science/adjustment/gauss-markov';
import { chiSquareQuantile } from '../../../server/science/distributions';
import { smallRandomNetwork } from './network-fixtures';

/**
 * Dense reference solution of the same Gauss–Markov model with ml-matrix (npm; dense inverse):
 * x = (AᵀPA)⁻¹AᵀPl, Q_xx = (AᵀPA)⁻¹, v = Ax − l, r_i = 1 − p_i a_iᵀQ_xx a_i (Ghilani 2017, ch. 11–12, 21).
 */
function denseAdjust(input: AdjustmentInput) {
  const { points, observations } = input;
  const offsets = input.options?.datumOffsets ?? [];
  const unknownOf = new Map<string, number>();
  const held = new Map<string, number>();
  for (const p of points) {
    if (p.fixedC !== undefined && !(p.sigmaFixed && p.sigmaFixed > 0)) held.set(p.code, p.fixedC);
    else unknownOf.set(p.code, unknownOf.size);
  }
  const nPts = unknownOf.size;
  offsets.forEach((o, k) => unknownOf.set(`offset:${o}`, nPts + k));
  const u = unknownOf.size;
  const rows: number[][] = [];
  const l: number[] = [];
  const p: number[] = [];
  for (const ob of observations) {
    const a = new Array(u).fill(0);
    let li = ob.deltaC;
    if (held.has(ob.to)) li -= held.get(ob.to)!;
    else a[unknownOf.get(ob.to)!] += 1;
    if (held.has(ob.from)) li += held.get(ob.from)!;
    else a[unknownOf.get(ob.from)!] -= 1;
    if (ob.datumOffset) a[unknownOf.get(`offset:${ob.datumOffset}`)!] += 1;
    rows.push(a);
    l.push(li);
    p.push(1 / ob.sigma ** 2);
  }
  for (const pt of points) {
    if (pt.fixedC !== undefined && pt.sigmaFixed && pt.sigmaFixed > 0) {
      const a = new Array(u).fill(0);
      a[unknownOf.get(pt.code)!] = 1;
      rows.push(a);
      l.push(pt.fixedC);
      p.push(1 / pt.sigmaFixed ** 2);
    }
  }
  const A = new Matrix(rows);
  const P = Matrix.diag(p);
  const L = Matrix.columnVector(l);
  const N = A.transpose().mmul(P).mmul(A);
  const Q = inverse(N);
  const x = Q.mmul(A.transpose().mmul(P).mmul(L));
  const v = A.mmul(x).sub(L);
  const r = rows.map((_, i) => 1 - p[i] * A.getRowVector(i).mmul(Q).mmul(A.getRowVector(i).transpose()).get(0, 0));
  const c = new Map<string, { c: number; sigma: number }>();
  for (const pt of points) {
    if (held.has(pt.code)) c.set(pt.code, { c: held.get(pt.code)!, sigma: 0 });
    else {
      const k = unknownOf.get(pt.code)!;
      c.set(pt.code, { c: x.get(k, 0), sigma: Math.sqrt(Q.get(k, k)) });
    }
  }
  const vtpv = v.to1DArray().reduce((s, vi, i) => s + p[i] * vi * vi, 0);
  return { c, v: v.to1DArray(), r, vtpv, A, p, dof: rows.length - u };
}

const rel = (a: number, b: number, scale: number) => Math.abs(a - b) / scale;

describe('adjustNetwork vs dense ml-matrix solution (seeded random networks with loops)', () => {
  const cases: [number, number, number, boolean][] = [
    [11, 8, 4, false],
    [12, 15, 9, true],
    [13, 25, 20, false],
    [14, 40, 30, true],
  ];
  it.each(cases)('seed %i: %i points, %i chords, weighted datum %s', (seed, n, chords, weighted) => {
    const net = smallRandomNetwork(seed, n, chords, weighted);
    const input: AdjustmentInput = { points: net.points, observations: net.observations };
    const res = adjustNetwork(input);
    const ref = denseAdjust(input);
    const maxV = Math.max(...ref.v.map(Math.abs));
    for (const pt of res.points) {
      const rp = ref.c.get(pt.code)!;
      expect(rel(pt.c, rp.c, Math.abs(rp.c))).toBeLessThan(1e-9);
      if (rp.sigma > 0) expect(rel(pt.sigma, rp.sigma, rp.sigma)).toBeLessThan(1e-9);
      else expect(pt.sigma).toBe(0);
    }
    res.observations.forEach((o, i) => {
      expect(Math.abs(o.residual - ref.v[i])).toBeLessThan(1e-9 * maxV);
      expect(Math.abs(o.redundancy - ref.r[i])).toBeLessThan(1e-9);
    });
    res.fixedPointObservations.forEach((o, s) => {
      const i = net.observations.length + s;
      expect(Math.abs(o.residual - ref.v[i])).toBeLessThan(1e-9 * maxV);
      expect(Math.abs(o.redundancy - ref.r[i])).toBeLessThan(1e-9);
    });
    expect(rel(res.vtpv, ref.vtpv, ref.vtpv)).toBeLessThan(1e-9);
    expect(res.degreesOfFreedom).toBe(ref.dof);

    // Invariants of least squares (Ghilani 2017 ch. 11; Baarda 1968): Aᵀ P v = 0 and Σ r_i = dof.
    const allV = [...res.observations.map((o) => o.residual), ...res.fixedPointObservations.map((o) => o.residual)];
    const atpv = ref.A.transpose().mmul(Matrix.columnVector(allV.map((vi, i) => ref.p[i] * vi)));
    const scale = Math.max(...allV.map((vi, i) => Math.abs(ref.p[i] * vi)));
    for (let k = 0; k < atpv.rows; k++) expect(Math.abs(atpv.get(k, 0))).toBeLessThan(1e-9 * scale);
    const sumR = [...res.observations, ...res.fixedPointObservations].reduce((s, o) => s + o.redundancy, 0);
    expect(sumR).toBeCloseTo(res.degreesOfFreedom, 9);
    // σ̂0 and the global test follow from vᵀPv (definition).
    expect(res.sigma0).toBeCloseTo(Math.sqrt(res.vtpv / res.degreesOfFreedom), 12);
    expect(res.globalTest!.upper).toBeCloseTo(chiSquareQuantile(0.975, res.degreesOfFreedom), 10);
  });

  it('datum offset parameter matches the dense solution', () => {
    const net = smallRandomNetwork(21, 20, 15, false);
    // A second height datum: observations into points 10..19 from outside carry an unknown offset of 0.3 m²/s².
    const observations: NetworkObservation[] = net.observations.map((o) => {
      const toIdx = Number(o.to.slice(2));
      const fromIdx = Number(o.from.slice(2));
      if ((toIdx >= 10) !== (fromIdx >= 10)) return { ...o, deltaC: o.deltaC + 0.3, datumOffset: 'D2' };
      return o;
    });
    const input: AdjustmentInput = { points: net.points, observations, options: { datumOffsets: ['D2'] } };
    const res = adjustNetwork(input);
    const ref = denseAdjust(input);
    for (const pt of res.points) expect(rel(pt.c, ref.c.get(pt.code)!.c, 1000)).toBeLessThan(1e-9);
    res.observations.forEach((o, i) => expect(Math.abs(o.redundancy - ref.r[i])).toBeLessThan(1e-9));
    expect(res.datumOffsets[0].name).toBe('D2');
    expect(Math.abs(res.datumOffsets[0].value - 0.3)).toBeLessThan(5 * res.datumOffsets[0].sigma);
  });
});

describe('adjustNetwork properties', () => {
  it('a tree with one held point reproduces the observations: zero residuals, zero redundancy, dof 0', () => {
    const net = smallRandomNetwork(31, 12, 0, false);
    const res = adjustNetwork({ points: net.points, observations: net.observations });
    expect(res.degreesOfFreedom).toBe(0);
    expect(res.sigma0).toBeNull();
    expect(res.globalTest).toBeNull();
    for (const o of res.observations) {
      expect(Math.abs(o.residual)).toBeLessThan(1e-9);
      expect(o.redundancy).toBe(0);
      expect(o.standardizedResidual).toBeNull();
    }
  });

  it('a +50 mm blunder in one section fails the global test, is removed first, and the final adjustment passes', () => {
    const net = smallRandomNetwork(41, 30, 25, false);
    const clean = adjustNetwork({ points: net.points, observations: net.observations });
    expect(clean.globalTest!.passed).toBe(true);
    // Pick a well-controlled section (redundancy > 0.3) so the blunder is detectable at all.
    const target = clean.observations.findIndex((o) => o.redundancy > 0.3);
    const blundered = net.observations.map((o, i) => (i === target ? { ...o, deltaC: o.deltaC + 0.05 * 9.81 } : o));
    const res = adjustNetwork({ points: net.points, observations: blundered });
    // Baarda 1968: test, remove the largest |w| above k, re-adjust, repeat.
    expect(res.snooping.initial.globalTest!.passed).toBe(false);
    expect(res.snooping.initial.globalTest!.statistic).toBeGreaterThan(res.snooping.initial.globalTest!.critical);
    expect(res.snooping.removals.length).toBeGreaterThan(0);
    expect(res.snooping.removals[0]).toMatchObject({ step: 1, source: 'observation', index: target });
    expect(res.snooping.suspects[0]).toMatchObject({ source: 'observation', index: target });
    expect(res.observations[target]).toMatchObject({ suspected: true, removedAtStep: 1 });
    expect(res.observations.filter((o) => o.suspected).length).toBe(res.snooping.removals.length);
    expect(res.globalTest!.passed).toBe(true);
    expect(res.degreesOfFreedom).toBe(res.snooping.initial.degreesOfFreedom - res.snooping.removals.length);
    // The removed observation's discrepancy against the final adjustment shows the 50 mm blunder.
    expect(res.observations[target].residual).toBeCloseTo(-0.05 * 9.81, 1);
    expect(res.snooping.criticalValue).toBeCloseTo(3.2905, 4);
  });

  it('a part of the network without datum is named in a typed error', () => {
    const points: NetworkPoint[] = [{ code: 'A', fixedC: 100 }, { code: 'B' }, { code: 'X1' }, { code: 'X2' }, { code: 'X3' }];
    const observations: NetworkObservation[] = [
      { from: 'A', to: 'B', deltaC: 1, sigma: 0.01 },
      { from: 'X1', to: 'X2', deltaC: 1, sigma: 0.01 },
      { from: 'X2', to: 'X3', deltaC: 1, sigma: 0.01 },
    ];
    let err: unknown;
    try {
      adjustNetwork({ points, observations });
    } catch (e) {
      err = e;
    }
    expect(err).toBeInstanceOf(AdjustmentInputError);
    const e = err as AdjustmentInputError;
    expect(e.detail.reason).toBe('disconnected');
    expect(e.detail.parts).toEqual([{ codes: ['X1', 'X2', 'X3'], count: 3 }]);
    expect(e.message).toMatch(/X1, X2, X3/);
  });

  it("'minimum' holds the first known point only; adjusted differences equal the 'fixed' run with that point alone", () => {
    const net = smallRandomNetwork(51, 15, 10, false);
    const withSecond = net.points.map((p, i) => (i === 5 ? { ...p, fixedC: net.trueC[5] + 3 } : p));
    const minimum = adjustNetwork({ points: withSecond, observations: net.observations, options: { constraint: 'minimum' } });
    const single = adjustNetwork({ points: net.points, observations: net.observations });
    expect(minimum.heldPoint).toBe('BM000');
    minimum.points.forEach((p, i) => {
      expect(p.c).toBeCloseTo(single.points[i].c, 9);
      expect(p.sigma).toBeCloseTo(single.points[i].sigma, 12);
    });
    expect(minimum.points[5].knownC).toBe(net.trueC[5] + 3);
    expect(minimum.points[5].datum).toBe('free');
  });

  it('reports an undeterminable datum offset by name', () => {
    const points: NetworkPoint[] = [{ code: 'A', fixedC: 0 }, { code: 'B' }];
    const observations: NetworkObservation[] = [{ from: 'A', to: 'B', deltaC: 1, sigma: 0.01, datumOffset: 'D' }];
    expect(() => adjustNetwork({ points, observations, options: { datumOffsets: ['D'] } })).toThrowError(/singular at unknown (B|datum offset D)/);
  });

  it('progress is reported in order and ends at 1', () => {
    const net = smallRandomNetwork(61, 10, 5, false);
    const fractions: number[] = [];
    adjustNetwork({ points: net.points, observations: net.observations, options: { onProgress: (f) => fractions.push(f) } });
    expect(fractions).toEqual([...fractions].sort((a, b) => a - b));
    expect(fractions.at(-1)).toBe(1);
  });
});
// A small level net in the observation-equation form of Ghilani, Adjustment Computations, 6th ed. (Wiley 2017),
// ch. 12 (ΔElev_ij + v = Elev_j − Elev_i, weights 1/σ²): four benchmarks, every leg levelled in both directions
// (invented data), P1 held at 100.000 m, every difference with σ = 4 mm. The expected values were computed
// independently from the dense normal equations with Python mpmath at 40 digits (x = (AᵀPA)⁻¹AᵀPl,
// Q_vv = σ²I − AQ_xxAᵀ, w_i = v_i/√q_vv,i); the adjustment is linear and unit-free, so heights in metres go in where C would.
describe('four-benchmark level net with legs in both directions (computed independently)', () => {
  const obs: [string, string, number][] = [
    ['P1', 'P2', 1.532], ['P2', 'P3', -0.847], ['P3', 'P4', 2.114], ['P4', 'P1', -2.806],
    ['P1', 'P3', 0.69], ['P2', 'P4', 1.262], ['P3', 'P1', -0.681], ['P4', 'P2', -1.275],
  ];
  const res = adjustNetwork({
    points: [{ code: 'P1', fixedC: 100 }, { code: 'P2' }, { code: 'P3' }, { code: 'P4' }],
    observations: obs.map(([from, to, deltaC]) => ({ from, to, deltaC, sigma: 0.004 })),
  });
  it('adjusted heights [m] and a-priori standard deviations [mm]', () => {
    const byCode = new Map(res.points.map((p) => [p.code, p]));
    expect(byCode.get('P2')!.c).toBeCloseTo(101.533416667, 8);
    expect(byCode.get('P3')!.c).toBeCloseTo(100.6865, 8);
    expect(byCode.get('P4')!.c).toBeCloseTo(102.802583333, 8);
    expect(byCode.get('P2')!.sigma * 1000).toBeCloseTo(2.5819889, 6);
    expect(byCode.get('P3')!.sigma * 1000).toBeCloseTo(2.30940108, 6);
    expect(byCode.get('P4')!.sigma * 1000).toBeCloseTo(2.5819889, 6);
  });
  it('degrees of freedom 5, vᵀPv = 9.11979, σ̂0·σ = 5.4022 mm', () => {
    expect(res.degreesOfFreedom).toBe(5);
    expect(res.vtpv).toBeCloseTo(9.11979166667, 8);
    expect(res.sigma0! * 4).toBeCloseTo(5.40216006, 6);
  });
  it('largest |w| = 2.194 for observation 6, below the 3.29 critical value (Baarda 1968, α0 = 0.001)', () => {
    const ws = res.observations.map((o) => Math.abs(o.standardizedResidual!));
    const iMax = ws.indexOf(Math.max(...ws));
    expect(iMax).toBe(5);
    expect(ws[iMax]).toBeCloseTo(2.194335, 5);
    expect(res.observations.every((o) => !o.suspected)).toBe(true);
  });
});
