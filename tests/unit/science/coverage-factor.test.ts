import { describe, expect, it } from 'vitest';
import { studentTCdf, studentTQuantile } from '../../../server/science/distributions';
import { COVERAGE_PROBABILITY_K2, combineBudget, coverageFactorFor } from '../../../server/science/uncertainty';

// JCGM 100:2008 (GUM) Table G.2: t_p(ν) for p = 68.27 %, 95 %, 95.45 % and 99 %, as printed (2 decimals; 3 at ν = 100)
// [values transcribed from memory of the table].
const TABLE_G2: ReadonlyArray<readonly [number, number, number, number, number]> = [
  // ν, 68.27 %, 95 %, 95.45 %, 99 %
  [1, 1.84, 12.71, 13.97, 63.66],
  [2, 1.32, 4.3, 4.53, 9.92],
  [3, 1.2, 3.18, 3.31, 5.84],
  [4, 1.14, 2.78, 2.87, 4.6],
  [5, 1.11, 2.57, 2.65, 4.03],
  [6, 1.09, 2.45, 2.52, 3.71],
  [7, 1.08, 2.36, 2.43, 3.5],
  [8, 1.07, 2.31, 2.37, 3.36],
  [9, 1.06, 2.26, 2.32, 3.25],
  [10, 1.05, 2.23, 2.28, 3.17],
  [15, 1.03, 2.13, 2.18, 2.95],
  [16, 1.03, 2.12, 2.17, 2.92],
  [20, 1.03, 2.09, 2.13, 2.85],
  [25, 1.02, 2.06, 2.11, 2.79],
  [30, 1.02, 2.04, 2.09, 2.75],
  [50, 1.01, 2.01, 2.05, 2.68],
];

describe('Student t quantiles against JCGM 100:2008 Table G.2', () => {
  it.each(TABLE_G2)('ν = %d', (nu, p6827, p95, p9545, p99) => {
    expect(studentTQuantile((1 + 0.6827) / 2, nu)).toBeCloseTo(p6827, 2);
    expect(studentTQuantile((1 + 0.95) / 2, nu)).toBeCloseTo(p95, 2);
    expect(studentTQuantile((1 + 0.9545) / 2, nu)).toBeCloseTo(p9545, 2);
    expect(studentTQuantile((1 + 0.99) / 2, nu)).toBeCloseTo(p99, 2);
  });

  it('ν = 100 and ν = ∞ (Table G.2: 2.025 and 2.000 at 95.45 %; 1.984 and 1.960 at 95 %)', () => {
    expect(studentTQuantile((1 + 0.9545) / 2, 100)).toBeCloseTo(2.025, 3);
    expect(studentTQuantile(0.975, 100)).toBeCloseTo(1.984, 3);
    expect(studentTQuantile(0.975, Infinity)).toBeCloseTo(1.96, 3);
    expect(coverageFactorFor(Infinity)).toBeCloseTo(2, 12);
  });

  it('the CDF inverts the quantile and ν = 1 is the Cauchy distribution, F(t) = ½ + atan(t)/π (closed form)', () => {
    for (const t of [-3, -0.5, 0, 0.7, 4, 30]) expect(studentTCdf(t, 1)).toBeCloseTo(0.5 + Math.atan(t) / Math.PI, 13);
    // ν = 2: F(t) = ½ + t / (2√(2 + t²)) (closed form of the t distribution with two degrees of freedom).
    for (const t of [-2, 0.3, 5]) expect(studentTCdf(t, 2)).toBeCloseTo(0.5 + t / (2 * Math.sqrt(2 + t * t)), 13);
    expect(studentTCdf(studentTQuantile(0.99, 7.5), 7.5)).toBeCloseTo(0.99, 12);
  });
});

describe('coverage factor from ν_eff (JCGM 100:2008 G.4.1, G.6.4)', () => {
  it('truncates ν_eff to the next lower integer before taking t_p (G.4.1 note)', () => {
    expect(coverageFactorFor(16.7)).toBe(coverageFactorFor(16));
    expect(coverageFactorFor(16.7)).toBeCloseTo(2.17, 2);
    // p = 95.45 % is 2Φ(2) − 1: k → 2 as ν_eff → ∞ (G.1.3).
    expect(COVERAGE_PROBABILITY_K2).toBeCloseTo(0.9545, 4);
    expect(coverageFactorFor(1e7)).toBeCloseTo(2, 12);
  });

  it('JCGM 100:2008 H.1 end-gauge calibration: u_c = 32 nm, ν_eff = 16, t_99(16) = 2.92, U_99 = 93 nm (H.1.4–H.1.6)', () => {
    // Table H.1 contributions |c_i|·u(x_i) and ν_i: l_s 25 nm (18), d 9.7 nm (25.6), δα 2.9 nm (50), δθ 16.6 nm (2);
    // α_s and θ contribute 0 at first order [from memory of Table H.1].
    const nm = 'nm';
    const lines = [
      { name: 'l_s', type: 'B' as const, standardUncertainty: 25, sensitivity: 1, unit: nm, degreesOfFreedom: 18 },
      { name: 'd', type: 'A' as const, standardUncertainty: 9.7, sensitivity: 1, unit: nm, degreesOfFreedom: 25.6 },
      { name: 'δα', type: 'B' as const, standardUncertainty: 2.9, sensitivity: 1, unit: nm, degreesOfFreedom: 50 },
      { name: 'δθ', type: 'B' as const, standardUncertainty: 16.6, sensitivity: 1, unit: nm, degreesOfFreedom: 2 },
    ];
    const b99 = combineBudget(lines, { coverageProbability: 0.99 });
    expect(Math.round(b99.combinedStandardUncertainty)).toBe(32);
    expect(Math.floor(b99.effectiveDegreesOfFreedom)).toBe(16);
    expect(b99.coverageFactor).toBeCloseTo(2.92, 2);
    expect(Math.round(b99.expandedUncertainty)).toBe(93);
    // Default p = 95.45 %: k = t_95.45(16) = 2.17 (Table G.2), not 2.
    const b = combineBudget(lines);
    expect(b.coverageProbability).toBe(COVERAGE_PROBABILITY_K2);
    expect(b.coverageFactor).toBeCloseTo(2.17, 2);
  });

  it('a budget with only Type B (infinite ν) components gives k = 2 at p = 95.45 %', () => {
    const b = combineBudget([{ name: 'a', type: 'B', standardUncertainty: 1, sensitivity: 1, unit: '1' }]);
    expect(b.effectiveDegreesOfFreedom).toBe(Infinity);
    expect(b.coverageFactor).toBeCloseTo(2, 12);
  });
});
