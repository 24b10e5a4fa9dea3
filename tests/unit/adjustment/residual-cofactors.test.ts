import { describe, expect, it } from 'vitest';
import { Matrix, inverse } from 'ml-matrix';
import { adjustNetwork, type NetworkObservation, type NetworkPoint } from '../../../server/science/adjustment/gauss-markov';
import { denseDesign, smallRandomNetwork } from './network-fixtures';

// The adjustment takes diag(Q_vv) from the selected inverse (Q_xx on the pattern of AᵀPA), and after data snooping
// from that inverse with rank-one downdates, never from a dense Q_vv. Reference: the dense cofactor matrix of the
// residuals of the Gauss–Markov model, Q_vv = Q_ll − A·Q_xx·Aᵀ with Q_ll = P⁻¹ and Q_xx = (AᵀPA)⁻¹, redundancy numbers
// r_i = p_i·(Q_vv)_ii and Baarda's w_i = v_i / (σ_i·√r_i) (Ghilani, "Adjustment Computations", 6th ed., Wiley 2017,
// ch. 21 "Blunder detection" — chapter from memory; Baarda 1968, Publ. on Geodesy 2(5)), computed here in full with
// ml-matrix (npm, dense inverse and products), a general linear-algebra library outside this project.

type Dense = { v: number[]; r: number[]; w: number[]; c: Map<string, { c: number; sigma: number }> };

/** Dense adjustment of the given observations; held points are those with fixedC and no sigmaFixed. */
function denseCofactors(points: NetworkPoint[], observations: NetworkObservation[]): Dense {
  const { unknownOf, held, A, P, l, sigma } = denseDesign(points, observations);
  const Qll = Matrix.diag(sigma.map((s) => s * s));
  const Qxx = inverse(A.transpose().mmul(P).mmul(A));
  const x = Qxx.mmul(A.transpose().mmul(P).mmul(Matrix.columnVector(l)));
  const v = A.mmul(x).sub(Matrix.columnVector(l)).to1DArray();
  const Qvv = Qll.clone().sub(A.mmul(Qxx).mmul(A.transpose()));
  const r = sigma.map((s, i) => Qvv.get(i, i) / (s * s));
  const w = v.map((vi, i) => vi / Math.sqrt(Qvv.get(i, i)));
  const c = new Map<string, { c: number; sigma: number }>();
  for (const pt of points) {
    if (held.has(pt.code)) c.set(pt.code, { c: held.get(pt.code)!, sigma: 0 });
    else {
      const k = unknownOf.get(pt.code)!;
      c.set(pt.code, { c: x.get(k, 0), sigma: Math.sqrt(Qxx.get(k, k)) });
    }
  }
  return { v, r, w, c };
}

describe('diag(Q_vv) from the selected inverse equals the dense Q_ll − A·Q_xx·Aᵀ', () => {
  it('one adjustment (no removals): redundancy numbers, residuals and w', () => {
    const net = smallRandomNetwork(7, 40, 35, true);
    const res = adjustNetwork({ points: net.points, observations: net.observations, options: { snooping: 'none' } });
    const ref = denseCofactors(net.points, net.observations);
    res.observations.forEach((o, i) => {
      expect(o.redundancy).toBeCloseTo(ref.r[i], 10);
      expect(o.residual).toBeCloseTo(ref.v[i], 9);
      // A section no loop controls (r = 0) has no w.
      if (ref.r[i] < 1e-9) expect(o.standardizedResidual).toBeNull();
      else expect(o.standardizedResidual!).toBeCloseTo(ref.w[i], 8);
    });
    // Σ r_i = n − u (Ghilani 2017, ch. 21 — from memory): the fixed-point pseudo-observation is a row as well.
    const sumR = res.observations.reduce((s, o) => s + o.redundancy, 0) + res.fixedPointObservations.reduce((s, o) => s + o.redundancy, 0);
    expect(sumR).toBeCloseTo(res.degreesOfFreedom, 9);
  });

  it('after data snooping removed several blunders: the downdated values equal a dense adjustment without them', () => {
    const net = smallRandomNetwork(23, 60, 60, true);
    const clean = adjustNetwork({ points: net.points, observations: net.observations, options: { snooping: 'none' } });
    // Four well-controlled sections get blunders of 30–60 mm (detectable: redundancy > 0.4).
    const targets = clean.observations.filter((o) => o.redundancy > 0.4).slice(0, 4).map((o) => o.index);
    expect(targets).toHaveLength(4);
    const observations = net.observations.map((o, i) => {
      const t = targets.indexOf(i);
      return t < 0 ? o : { ...o, deltaC: o.deltaC + (0.03 + 0.01 * t) * 9.81 };
    });
    const res = adjustNetwork({ points: net.points, observations });
    expect(res.snooping.removals.length).toBeGreaterThanOrEqual(4);
    expect(res.snooping.removals.map((r) => r.index).slice(0, 4).sort()).toEqual([...targets].sort());

    const kept = res.observations.filter((o) => o.removedAtStep === null);
    const removedFixed = new Set(res.fixedPointObservations.filter((f) => f.removedAtStep !== null).map((f) => f.code));
    const points = net.points.map((p) => (removedFixed.has(p.code) ? { code: p.code } : p));
    const ref = denseCofactors(points, kept.map((o) => observations[o.index]));
    kept.forEach((o, j) => {
      expect(o.redundancy).toBeCloseTo(ref.r[j], 9);
      expect(o.residual).toBeCloseTo(ref.v[j], 8);
      if (ref.r[j] < 1e-9) expect(o.standardizedResidual).toBeNull();
      else expect(o.standardizedResidual!).toBeCloseTo(ref.w[j], 7);
    });
    for (const p of res.points) {
      const d = ref.c.get(p.code)!;
      expect(p.c).toBeCloseTo(d.c, 8);
      expect(p.sigma).toBeCloseTo(d.sigma, 10);
    }
    // Every |w| left is below the critical value: Baarda's iteration ended (Baarda 1968).
    expect(res.snooping.maxRemainingW!).toBeLessThan(res.snooping.criticalValue);
  });
});
