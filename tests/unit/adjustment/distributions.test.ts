import { describe, expect, it } from 'vitest';
import { chiSquareCdf, chiSquareQuantile, chiSquareSurvival, normalCdf, normalQuantile } from '../../../server/science/distributions';

// NIST/SEMATECH e-Handbook of Statistical Methods, §1.3.6.7.4 "Critical Values of the Chi-Square Distribution"
// (3 decimals). The table values are from memory; each one agrees with a public 5-decimal χ² table
// (columns .995…005) read while writing these tests, which is also used at 1e-5 below.
describe('χ² quantile vs NIST/SEMATECH e-Handbook table 1.3.6.7.4', () => {
  // [nu, probability of exceeding, critical value]
  const upper: [number, number, number][] = [
    [1, 0.1, 2.706], [1, 0.05, 3.841], [1, 0.025, 5.024], [1, 0.01, 6.635], [1, 0.001, 10.828],
    [5, 0.05, 11.070], [5, 0.025, 12.833],
    [10, 0.1, 15.987], [10, 0.05, 18.307], [10, 0.025, 20.483], [10, 0.01, 23.209], [10, 0.001, 29.588],
    [100, 0.05, 124.342], [100, 0.025, 129.561], [100, 0.01, 135.807], [100, 0.001, 149.449],
  ];
  it.each(upper)('upper critical value nu=%i, P(exceed)=%f → %f', (nu, pExceed, value) => {
    expect(Math.abs(chiSquareQuantile(1 - pExceed, nu) - value)).toBeLessThan(6e-4);
  });
  const lower: [number, number, number][] = [
    [1, 0.95, 0.004], [10, 0.9, 4.865], [10, 0.95, 3.940], [10, 0.975, 3.247], [10, 0.99, 2.558],
    [100, 0.95, 77.929], [100, 0.975, 74.222],
  ];
  it.each(lower)('lower critical value nu=%i, P(exceed)=%f → %f', (nu, pExceed, value) => {
    expect(Math.abs(chiSquareQuantile(1 - pExceed, nu) - value)).toBeLessThan(6e-4);
  });
  // 5-decimal entries of the public χ² table mentioned above (columns: probability of exceeding).
  it.each([
    [1, 0.05, 3.84146], [1, 0.025, 5.02389], [1, 0.01, 6.6349], [2, 0.05, 5.99146], [4, 0.05, 9.48773],
    [10, 0.05, 18.30704], [10, 0.025, 20.48318], [10, 0.01, 23.20925], [10, 0.975, 3.24697], [10, 0.995, 2.15586],
  ])('5-decimal table nu=%i, P(exceed)=%f → %f', (nu, pExceed, value) => {
    expect(Math.abs(chiSquareQuantile(1 - pExceed, nu) - value)).toBeLessThan(6e-6);
  });
  it('is the inverse of the χ² CDF, including far tails and large nu', () => {
    for (const nu of [1, 2, 3, 7, 50, 1000, 60000]) {
      for (const p of [1e-9, 0.001, 0.025, 0.5, 0.975, 0.999, 1 - 1e-9]) {
        const x = chiSquareQuantile(p, nu);
        const back = p > 0.5 ? chiSquareSurvival(x, nu) : chiSquareCdf(x, nu);
        const target = p > 0.5 ? 1 - p : p;
        expect(Math.abs(back - target) / target).toBeLessThan(1e-6);
      }
    }
  });
  it('nu = 2 has the closed form −2 ln(1 − p) (exponential distribution, common practice)', () => {
    for (const p of [0.01, 0.5, 0.95, 0.999]) expect(chiSquareQuantile(p, 2)).toBeCloseTo(-2 * Math.log(1 - p), 12);
  });
});

// NIST/SEMATECH e-Handbook §1.3.6.7.1 "Cumulative Distribution Function of the Standard Normal Distribution"
// (area from 0 to z, 5 decimals): z = 1.96 → 0.47500, z = 2.58 → 0.49506, z = 3.29 → 0.49950 (from memory).
describe('standard normal vs NIST/SEMATECH e-Handbook table 1.3.6.7.1', () => {
  it.each([[1.96, 0.475], [2.58, 0.49506], [3.29, 0.4995], [1.0, 0.34134]])('area 0..%f = %f', (z, area) => {
    expect(Math.abs(normalCdf(z) - 0.5 - area)).toBeLessThan(6e-6);
  });
  it('Baarda critical value for α0 = 0.001 two-sided is 3.29 (Baarda 1968; table above)', () => {
    const k = normalQuantile(1 - 0.001 / 2);
    expect(Math.abs(k - 3.29)).toBeLessThan(0.005);
    expect(normalCdf(k)).toBeCloseTo(0.9995, 14);
  });
  it('two-sided 5 % value 1.96 and symmetry', () => {
    expect(Math.abs(normalQuantile(0.975) - 1.96)).toBeLessThan(5e-5);
    expect(normalQuantile(0.025)).toBeCloseTo(-normalQuantile(0.975), 12);
    expect(normalCdf(normalQuantile(1e-12)) / 1e-12).toBeCloseTo(1, 8);
  });
});
