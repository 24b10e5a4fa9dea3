import { describe, expect, it } from 'vitest';
import { Matrix, inverse } from 'ml-matrix';
import { adjustNetwork, type NetworkObservation, type NetworkPoint } from '../../../server/science/adjustment/gauss-markov';
import { denseDesign, gridNetwork } from './network-fixtures';

// The sparse path (minimum-degree ordering, LDLᵀ, selected inversion on supernode blocks, supernodal solves, outlier
// screening by rank-one downdates and the adjustment after the removals reusing the factor) against a dense solution
// of the same Gauss–Markov model without the removed observations: x̂ = (AᵀPA)⁻¹AᵀPl, Q_xx = (AᵀPA)⁻¹ (Ghilani,
// "Adjustment Computations", 6th ed., Wiley 2017, ch. 12 — chapter from memory), σ_AB² = q_AA + q_BB − 2q_AB for an
// adjusted difference, r_i = 1 − p_i·a_iᵀQ_xx·a_i; dense inverse by ml-matrix (npm), a general linear-algebra library
// outside this project. Agreement to 1e-9 relative is the bound the optimised path must keep (common practice for
// double precision on normal equations of this condition; Golub & Van Loan, Matrix Computations, 4th ed., §4.2 for the
// Cholesky/LDLᵀ rounding analysis).

type DenseResult = { c: Map<string, { c: number; sigma: number }>; r: number[]; q: (a: string, b: string) => number };

/** Dense adjustment; held points: fixedC without sigmaFixed; weighted: with sigmaFixed > 0 (pseudo-observation). */
function denseAdjust(points: NetworkPoint[], observations: NetworkObservation[]): DenseResult {
  const { unknownOf, held, u, A, P, l } = denseDesign(points, observations);
  const Qxx = inverse(A.transpose().mmul(P).mmul(A));
  const x = Qxx.mmul(A.transpose().mmul(P).mmul(Matrix.columnVector(l)));
  const AQ = A.mmul(Qxx);
  const r = observations.map((ob, i) => {
    let qaa = 0;
    for (let k = 0; k < u; k++) qaa += AQ.get(i, k) * A.get(i, k);
    return 1 - qaa / (ob.sigma * ob.sigma);
  });
  const c = new Map<string, { c: number; sigma: number }>();
  for (const pt of points) {
    if (held.has(pt.code)) c.set(pt.code, { c: held.get(pt.code)!, sigma: 0 });
    else {
      const k = unknownOf.get(pt.code)!;
      c.set(pt.code, { c: x.get(k, 0), sigma: Math.sqrt(Qxx.get(k, k)) });
    }
  }
  const q = (a: string, b: string): number => {
    const ia = unknownOf.get(a);
    const ib = unknownOf.get(b);
    return ia === undefined || ib === undefined ? 0 : Qxx.get(ia, ib);
  };
  return { c, r, q };
}

const rel = (a: number, b: number): number => Math.abs(a - b) / Math.max(Math.abs(b), 1e-300);

describe('optimised sparse adjustment equals the dense solution (≤ 1e-9 relative)', () => {
  it.each([
    [101, 225, 4],
    [202, 324, 6],
  ])('grid network seed %i, %i benchmarks, %i blunders screened and removed', (seed, n, blunders) => {
    const net = gridNetwork(seed, n);
    // Point 0 is held by the generator; one more point gets a weighted known value (a pseudo-observation).
    net.points[n - 1] = { ...net.points[n - 1], fixedC: net.trueC[n - 1] + 0.01, sigmaFixed: 0.02 };
    // Blunders of 40–80 mm on well-spread levelling sections.
    const step = Math.floor(net.observations.length / (blunders + 1));
    const hit = new Set(Array.from({ length: blunders }, (_, b) => (b + 1) * step));
    const observations = net.observations.map((o, i) => (hit.has(i) ? { ...o, deltaC: o.deltaC + (0.04 + 0.01 * (i % 5)) * 9.81 } : o));
    const pairs = [
      { from: net.points[3].code, to: net.points[n - 5].code },
      { from: net.points[40].code, to: net.points[41].code },
    ];
    const res = adjustNetwork({ points: net.points, observations, options: { differences: pairs } });
    expect(res.snooping.removals.length).toBeGreaterThanOrEqual(blunders);

    const kept = res.observations.filter((o) => o.removedAtStep === null);
    const removedFixed = new Set(res.fixedPointObservations.filter((f) => f.removedAtStep !== null).map((f) => f.code));
    const points = net.points.map((p) => (removedFixed.has(p.code) ? { code: p.code } : p));
    const ref = denseAdjust(points, kept.map((o) => observations[o.index]));

    let worstC = 0;
    let worstSigma = 0;
    for (const p of res.points) {
      const d = ref.c.get(p.code)!;
      worstC = Math.max(worstC, rel(p.c, d.c));
      if (d.sigma > 0) worstSigma = Math.max(worstSigma, rel(p.sigma, d.sigma));
      else expect(p.sigma).toBe(0);
    }
    expect(worstC).toBeLessThan(1e-9);
    expect(worstSigma).toBeLessThan(1e-9);
    // Redundancy numbers lie in [0, 1]: absolute agreement.
    kept.forEach((o, j) => expect(Math.abs(o.redundancy - Math.min(Math.max(ref.r[j], 0), 1))).toBeLessThan(1e-9));
    res.differences.forEach((d, j) => {
      const { from, to } = pairs[j];
      const s = Math.sqrt(ref.q(from, from) + ref.q(to, to) - 2 * ref.q(from, to));
      expect(rel(d.sigma, s)).toBeLessThan(1e-9);
      expect(Math.abs(d.deltaC - (ref.c.get(to)!.c - ref.c.get(from)!.c))).toBeLessThan(1e-9 * Math.abs(ref.c.get(to)!.c));
    });
  });
});

describe('the adjustment after screened removals equals a fresh adjustment of the kept observations', () => {
  // Same estimator, two computations: the pass after the screening reuses the first pass's factor (with rank-one
  // downdates, Sherman–Morrison) and its checked observations; the reference adjusts the kept observations from
  // scratch (snooping 'none': one assembly, ordering, factorisation and selected inversion). Agreement to 1e-9
  // relative on values and standard deviations, common practice for two exact algorithms in double precision.
  it('with a datum offset, a shared parameter (one observation naming it twice) and a weighted datum point', () => {
    const n = 196;
    const net = gridNetwork(303, n);
    net.points[n - 1] = { ...net.points[n - 1], fixedC: net.trueC[n - 1] + 0.01, sigmaFixed: 0.02 };
    const step = Math.floor(net.observations.length / 6);
    const observations: NetworkObservation[] = net.observations.map((o, i) => {
      const { lengthKm: _l, ...ob } = o;
      let out: NetworkObservation = i % step === step - 1 && i < 5 * step ? { ...ob, deltaC: ob.deltaC + 0.06 * 9.81 } : ob;
      // The eastern third of the grid is tied in through a datum offset; every fourth observation shares a link effect.
      if (i % 3 === 0) out = { ...out, datumOffset: 'east' };
      if (i % 4 === 0) out = { ...out, terms: [{ name: 'link', coefficient: 1 }] };
      if (i === 8) out = { ...out, terms: [{ name: 'link', coefficient: 0.5 }, { name: 'link', coefficient: 0.5 }] };
      return out;
    });
    const options = { datumOffsets: ['east'], sharedParameters: [{ name: 'link', sigma: 0.05 }] };
    const res = adjustNetwork({ points: net.points, observations, options });
    expect(res.snooping.removals.length).toBeGreaterThanOrEqual(4);

    const keptIdx = res.observations.filter((o) => o.removedAtStep === null).map((o) => o.index);
    const removedFixed = new Set(res.fixedPointObservations.filter((f) => f.removedAtStep !== null).map((f) => f.code));
    const points = net.points.map((p) => (removedFixed.has(p.code) ? { code: p.code } : p));
    const ref = adjustNetwork({ points, observations: keptIdx.map((k) => observations[k]), options: { ...options, snooping: 'none' } });

    res.points.forEach((p, i) => {
      expect(rel(p.c, ref.points[i].c)).toBeLessThan(1e-9);
      if (ref.points[i].sigma > 0) expect(rel(p.sigma, ref.points[i].sigma)).toBeLessThan(1e-9);
      else expect(p.sigma).toBe(0);
      expect(p.datum).toBe(ref.points[i].datum);
    });
    keptIdx.forEach((k, j) => {
      const a = res.observations[k];
      const b = ref.observations[j];
      expect(Math.abs(a.redundancy - b.redundancy)).toBeLessThan(1e-9);
      expect(Math.abs(a.residual - b.residual)).toBeLessThan(1e-9 * Math.max(1, Math.abs(b.residual)));
      expect(Math.abs(a.sharedEffect - b.sharedEffect)).toBeLessThan(1e-9);
    });
    expect(res.degreesOfFreedom).toBe(ref.degreesOfFreedom);
    expect(rel(res.vtpv, ref.vtpv)).toBeLessThan(1e-9);
    expect(res.datumOffsets).toHaveLength(1);
    expect(rel(res.datumOffsets[0].value, ref.datumOffsets[0].value)).toBeLessThan(1e-9);
    expect(rel(res.datumOffsets[0].sigma, ref.datumOffsets[0].sigma)).toBeLessThan(1e-9);
    const [sa] = res.sharedParameters;
    const [sb] = ref.sharedParameters;
    // The count is of the terms naming it among the kept observations (observation 8 names it twice).
    expect(sa.observations).toBe(sb.observations);
    expect(Math.abs(sa.value - sb.value)).toBeLessThan(1e-9 * Math.max(1e-3, Math.abs(sb.value)));
    expect(rel(sa.sigma, sb.sigma)).toBeLessThan(1e-9);
  });
});
