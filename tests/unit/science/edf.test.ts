import { describe, expect, it } from 'vitest';
import { expectedModRatio, greenhallEdf } from '../../../server/science/edf';
import { b1Ratio, oadevEdf } from '../../../server/science/stability';
import { gaussianFrom, powerLawFrequencyNoise, uniformRng } from '../../helpers/power-law-noise';

/** Overlapping Allan variance of frequency data at factor m (SP 1065 §5.2.4), for the Monte Carlo checks. */
function oavar(y: Float64Array, m: number): number {
  const s = new Float64Array(y.length + 1);
  for (let i = 0; i < y.length; i++) s[i + 1] = s[i] + y[i];
  let sum = 0;
  let n = 0;
  for (let i = 0; i + 2 * m <= y.length; i++) {
    const d = s[i + 2 * m] - 2 * s[i + m] + s[i];
    sum += d * d;
    n++;
  }
  return sum / (2 * m * m * n);
}

describe('Greenhall–Riley EDF (Greenhall & Riley 2003, PTTI)', () => {
  it('white FM at m = 1: EDF of the overlapping AVAR is exactly 2(N − 2)/3 for N − 2 first differences of white y', () => {
    // Derivation (common practice): with d_i = y_{i+1} − y_i, E[d²] = 2σ², Var(d²) = 8σ⁴, Cov(d_i², d_{i+1}²) = 2σ⁴, so
    // EDF = 2E[Σd²]²/Var(Σd²) = 2n/3 for n differences (to O(1)); SP 1065 Table 5 gives the same at m = 1.
    const N = 1025;
    const edf = greenhallEdf(0, 1, N, { d: 2, overlapping: true, modified: false });
    expect(edf / ((2 * (N - 2)) / 3)).toBeCloseTo(1, 2);
    expect(edf / oadevEdf('WFM', N, 1)).toBeCloseTo(1, 2);
  });

  it('agrees with the simple SP 1065 §5.3 approximations (Table 5) for white, flicker and random-walk FM within 10 % for m ≥ 4', () => {
    for (const [noise, alpha] of [['WFM', 0], ['FFM', -1], ['RWFM', -2]] as const) {
      for (const [N, m] of [[1025, 4], [1025, 16], [1025, 64], [10001, 100], [10001, 1000]] as const) {
        const ratio = greenhallEdf(alpha, m, N, { d: 2, overlapping: true, modified: false }) / oadevEdf(noise, N, m);
        expect(ratio).toBeGreaterThan(0.9);
        expect(ratio).toBeLessThan(1.1);
      }
    }
  });

  it('EDF grows in proportion to the record length at fixed m (N/m scaling of every SP 1065 §5.3 formula)', () => {
    const e1 = greenhallEdf(0, 8, 4097, { d: 2, overlapping: false, modified: false });
    const e2 = greenhallEdf(0, 8, 8193, { d: 2, overlapping: false, modified: false });
    expect(e2 / e1).toBeCloseTo(2, 1);
  });

  it('matches EDF = 2·E[σ̂²]²/Var(σ̂²) of simulated overlapping Allan variances (SP 1065 §5.3 definition), white, flicker and random-walk FM', () => {
    const next = gaussianFrom(uniformRng(7));
    const N = 1024;
    for (const [beta, alpha, m] of [[0, 0, 1], [0, 0, 8], [1, -1, 4], [2, -2, 16]] as const) {
      const values: number[] = [];
      for (let r = 0; r < 800; r++) {
        const y = beta === 0 ? Float64Array.from({ length: N }, () => next()) : powerLawFrequencyNoise(N, beta, next);
        values.push(oavar(y, m));
      }
      const mean = values.reduce((a, v) => a + v, 0) / values.length;
      const variance = values.reduce((a, v) => a + (v - mean) ** 2, 0) / (values.length - 1);
      const simulated = (2 * mean * mean) / variance;
      const edf = greenhallEdf(alpha, m, N + 1, { d: 2, overlapping: true, modified: false });
      // 800 replicas: a variance estimate of a near-χ² statistic is good to about √(2/800)·√(1 + excess kurtosis/2) ≈ ±6 % (1σ);
      // the band is ±4σ.
      expect(simulated / edf).toBeGreaterThan(0.75);
      expect(simulated / edf).toBeLessThan(1.3);
    }
  });

  it('gives EDF for MDEV and the Hadamard variance, and refuses α + 2d ≤ 1', () => {
    expect(greenhallEdf(-2, 4, 1025, { d: 2, overlapping: true, modified: true })).toBeGreaterThan(10);
    expect(greenhallEdf(-4, 4, 1025, { d: 3, overlapping: true, modified: false })).toBeGreaterThan(10);
    expect(greenhallEdf(-4, 4, 1025, { d: 2, overlapping: true, modified: false })).toBeNaN();
  });
});

describe('noise-identification ratios (SP 1065 §5.6)', () => {
  it('B1 bias function: 1 for white FM at any N, N·ln N/(2(N−1)·ln 2) for flicker FM, N/2 for random-walk FM (Barnes 1969)', () => {
    for (const N of [4, 16, 100]) {
      expect(b1Ratio(N, -1)).toBeCloseTo(1, 12);
      expect(b1Ratio(N, 0)).toBeCloseTo((N * Math.log(N)) / (2 * (N - 1) * Math.LN2), 12);
      expect(b1Ratio(N, 1)).toBeCloseTo(N / 2, 12);
    }
  });

  it('R(n) = Mod σ²/σ² tends to 1/2 for white FM and falls as 1/n for white PM (Allan & Barnes 1981; SP 1065 §5.6) [from memory]', () => {
    expect(expectedModRatio(0, 256)).toBeCloseTo(0.5, 2);
    expect(expectedModRatio(2, 64) * 64).toBeCloseTo(1, 1);
    expect(expectedModRatio(1, 64)).toBeGreaterThan(expectedModRatio(2, 64));
    expect(expectedModRatio(1, 64)).toBeLessThan(expectedModRatio(0, 64));
  });
});
