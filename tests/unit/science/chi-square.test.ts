import { describe, expect, it } from 'vitest';
import { chiSquareCdf, chiSquareQuantile, logGamma } from '../../../server/science/distributions';

// Critical values of the chi-square distribution: NIST/SEMATECH e-Handbook of Statistical Methods, §1.3.6.7.4
// (values from memory; the 5-decimal entries agree with the table of upper critical values printed there).
// Upper-tail entries: P(χ² > x) = α, i.e. quantile 1 − α. Lower-tail entries: P(χ² < x) = α.
const upper: [number, number, number][] = [
  [1, 0.05, 3.84146],
  [1, 0.01, 6.6349],
  [2, 0.05, 5.99146],
  [5, 0.05, 11.0705],
  [5, 0.01, 15.08627],
  [10, 0.1, 15.98718],
  [10, 0.05, 18.30704],
  [10, 0.025, 20.48318],
  [10, 0.01, 23.20925],
  [20, 0.05, 31.41043],
  [100, 0.05, 124.34211],
];
const lower: [number, number, number][] = [
  [1, 0.05, 0.00393],
  [5, 0.05, 1.14548],
  [10, 0.1, 4.86518],
  [10, 0.05, 3.9403],
  [10, 0.01, 2.55821],
  [100, 0.05, 77.92947],
];

describe('chi-square quantiles', () => {
  it('match the upper-tail critical values', () => {
    for (const [dof, alpha, x] of upper) expect(chiSquareQuantile(1 - alpha, dof)).toBeCloseTo(x, 4);
  });

  it('match the lower-tail critical values', () => {
    for (const [dof, alpha, x] of lower) expect(chiSquareQuantile(alpha, dof)).toBeCloseTo(x, 4);
  });

  it('invert the CDF for non-integer degrees of freedom (EDFs are not integers)', () => {
    for (const dof of [0.7, 3.3, 47.9, 1234.5, 2e5]) {
      for (const p of [0.001, 0.1585, 0.5, 0.8415, 0.999]) {
        expect(chiSquareCdf(chiSquareQuantile(p, dof), dof)).toBeCloseTo(p, 6);
      }
    }
  });

  it('lnΓ matches factorials and Γ(1/2) = √π (exact identities)', () => {
    expect(logGamma(10)).toBeCloseTo(Math.log(362880), 12);
    expect(logGamma(0.5)).toBeCloseTo(0.5 * Math.log(Math.PI), 12);
  });
});
