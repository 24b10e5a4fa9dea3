import { describe, expect, it } from 'vitest';
import {
  cFromNormalHeight,
  meanNormalGravity,
  normalGravityAtHeight,
  normalGravityOnEllipsoid,
  normalHeightFromC,
} from '../../../server/science/normal-gravity';

describe('normal gravity (GRS80)', () => {
  it('Somigliana closed form matches the computed table (computed from Moritz 2000 with mpmath at 40 digits)', () => {
    const table: [number, number][] = [
      [0, 9.78032677153],
      [30, 9.79324870361],
      [45, 9.80619920252],
      [52.3, 9.81273891838],
      [60, 9.81917838502],
      [90, 9.83218636852],
    ];
    for (const [lat, g] of table) expect(Math.abs(normalGravityOnEllipsoid(lat) - g)).toBeLessThan(1e-10);
  });

  it('reproduces the published γe and γp (Moritz 2000: 9.780 326 7715 and 9.832 186 3685 m/s²)', () => {
    expect(normalGravityOnEllipsoid(0)).toBeCloseTo(9.7803267715, 10);
    expect(normalGravityOnEllipsoid(90)).toBeCloseTo(9.8321863685, 10);
    expect(normalGravityOnEllipsoid(-90)).toBeCloseTo(9.8321863685, 10);
  });

  it('agrees with the Moritz (2000) sin²φ series to 1e-9 m/s² (series coefficients of Moritz 2000)', () => {
    for (const lat of [0, 15, 33.3, 47, 71, 89]) {
      const s2 = Math.sin((lat * Math.PI) / 180) ** 2;
      const series = 9.7803267715 * (1 + 0.0052790414 * s2 + 0.0000232718 * s2 ** 2 + 0.0000001262 * s2 ** 3 + 0.0000000007 * s2 ** 4);
      expect(Math.abs(normalGravityOnEllipsoid(lat) - series)).toBeLessThan(1e-9);
    }
  });

  it('second-order height formula matches the γ_h table (H&M 1967 eq. 2-124, equation number from memory; table computed with mpmath)', () => {
    const table: [number, number, number][] = [
      [45, 100, 9.80589065481],
      [45, 1000, 9.80311437625],
      [52.3, 100, 9.81243042495],
      [0, 1000, 9.7772398017],
      [90, 1000, 9.82910370425],
    ];
    for (const [lat, h, g] of table) expect(Math.abs(normalGravityAtHeight(lat, h) - g)).toBeLessThan(1e-10);
  });

  it('free-air gradient at h = 0 is −0.308 55 mGal/m at 45° (computed from H&M 1967 eq. 2-124 with GRS80)', () => {
    const gradient_mGal_per_m = ((normalGravityAtHeight(45, 1) - normalGravityAtHeight(45, -1)) / 2) * 1e5;
    expect(gradient_mGal_per_m).toBeCloseTo(-0.3085549, 6);
  });

  it('mean normal gravity equals the average of γ_h over 0…H (definition, H&M 1967 §4-6)', () => {
    const lat = 52.3;
    const heightM = 2500;
    const steps = 10_000;
    let integral = 0;
    for (let i = 0; i < steps; i++) integral += normalGravityAtHeight(lat, ((i + 0.5) * heightM) / steps);
    expect(meanNormalGravity(lat, heightM)).toBeCloseTo(integral / steps, 9);
  });

  it('normal height and geopotential number invert each other', () => {
    for (const [lat, h] of [[0, 0], [45, 1234.5678], [52.3, -12.3], [70, 4800]] as const) {
      const c = cFromNormalHeight(h, lat);
      expect(normalHeightFromC(c, lat)).toBeCloseTo(h, 9);
    }
    // 100 m at 45°: C ≈ γ0·H − small correction; γ0 from Somigliana's formula (Moritz 2000), computed with mpmath.
    expect(cFromNormalHeight(100, 45)).toBeCloseTo(100 * 9.80619920252 * (1 - (1 + 1 / 298.257222101 + 0.00344978600308 - 1 / 298.257222101) * 100 / 6378137 + 1e4 / 6378137 ** 2), 8);
  });
});
