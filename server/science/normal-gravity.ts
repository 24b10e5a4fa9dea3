// Normal gravity of the GRS80 level ellipsoid: Somigliana's closed formula (Moritz 2000, J Geod 74:128;
// Heiskanen & Moritz 1967 eq. 2-78), the second-order height expansion (H&M eq. 2-124), and the mean normal
// gravity along the normal plumb line used for normal heights H_N = C / γ̄ (H&M 1967 eq. 4-42).

import {
  GRS80_A_M,
  GRS80_E2,
  GRS80_F,
  GRS80_GAMMA_E_M_PER_S2,
  GRS80_M,
  GRS80_SOMIGLIANA_K,
} from './constants';

const DEG = Math.PI / 180;

function sin2(latDeg: number): number {
  const s = Math.sin(latDeg * DEG);
  return s * s;
}

/** Normal gravity on the ellipsoid at geodetic latitude φ, m/s². */
export function normalGravityOnEllipsoid(latDeg: number): number {
  const s2 = sin2(latDeg);
  return (GRS80_GAMMA_E_M_PER_S2 * (1 + GRS80_SOMIGLIANA_K * s2)) / Math.sqrt(1 - GRS80_E2 * s2);
}

function heightCoefficient(latDeg: number): number {
  return 1 + GRS80_F + GRS80_M - 2 * GRS80_F * sin2(latDeg);
}

/** Normal gravity at height h above the ellipsoid (second-order series), m/s². */
export function normalGravityAtHeight(latDeg: number, heightM: number): number {
  const a = GRS80_A_M;
  return normalGravityOnEllipsoid(latDeg) * (1 - (2 / a) * heightCoefficient(latDeg) * heightM + (3 / (a * a)) * heightM * heightM);
}

/** Mean normal gravity between the ellipsoid and height H along the normal plumb line, m/s² (H&M eq. 4-42). */
export function meanNormalGravity(latDeg: number, heightM: number): number {
  const a = GRS80_A_M;
  return normalGravityOnEllipsoid(latDeg) * (1 - heightCoefficient(latDeg) * (heightM / a) + (heightM * heightM) / (a * a));
}

/** Geopotential number of a point with normal height H: C = H·γ̄(H), m²/s². */
export function cFromNormalHeight(normalHeightM: number, latDeg: number): number {
  return normalHeightM * meanNormalGravity(latDeg, normalHeightM);
}

/** Normal height from a geopotential number by fixed-point iteration of H = C/γ̄(H); converges in a few steps since γ̄ varies by ~3e-7 per metre. */
export function normalHeightFromC(c_m2s2: number, latDeg: number): number {
  let heightM = c_m2s2 / normalGravityOnEllipsoid(latDeg);
  for (let i = 0; i < 50; i++) {
    const next = c_m2s2 / meanNormalGravity(latDeg, heightM);
    if (Math.abs(next - heightM) < 1e-12 * Math.max(1, Math.abs(next))) return next;
    heightM = next;
  }
  return heightM;
}
