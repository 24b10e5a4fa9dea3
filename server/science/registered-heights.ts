// Registered normal heights H = h − ζ of two sites, in a stated tide system, and the uncertainty of their difference
// with a stated correlation model.
//
// Permanent tide (Ekman 1989, "Impacts of geodynamic phenomena on systems for height and gravity", Bull. Géod. 63;
// Mäkinen & Ihde 2009, "The permanent tide in height systems", IAG Symposia 133): with δ(φ) = 0.099 − 0.296 sin²φ m
// (the direct permanent-tide potential divided by normal gravity) and conventional Love numbers k = 0.30, h = 0.62:
//   ζ_mean − ζ_zero = δ,            ζ_zero − ζ_tide-free = k·δ          (quasigeoid / geoid)
//   h_mean = h_zero (one crust),     h_mean − h_tide-free = h·δ          (ellipsoidal heights: the crust system)
//   H = h − ζ in the same system, hence H_mean − H_zero = −δ and H_mean − H_tide-free = −(1 + k − h)·δ,
// which is what heightMeanMinusZeroTideM / heightMeanMinusTideFreeM in tides.ts state. GNSS heights in ITRF are
// conventionally tide-free (IERS Conventions 2010, TN 36, §7.1.1, "conventional tide free").
//
// Correlation model (our assumption, stated on the results page and the certificate):
//  - ζ at two sites from the same grid: ρ = exp(−d/L), L the grid's correlation length (default 100 km); from
//    different grids or entered values: ρ = 0.
//  - ellipsoidal heights: ρ = 0 (independent GNSS determinations at the two sites) unless a coefficient is given.
// σ²(ΔH) = σ_hA² + σ_hB² − 2ρ_h·σ_hA·σ_hB + σ_ζA² + σ_ζB² − 2ρ_ζ·σ_ζA·σ_ζB (JCGM 100:2008 eq. 13).

import { PERMANENT_TIDE_H, PERMANENT_TIDE_K, type TideSystem } from './tides';

/** Default correlation length of a quasigeoid grid's errors [km] (our assumption; typical of regional models, from memory). */
export const DEFAULT_QUASIGEOID_CORRELATION_LENGTH_KM = 100;

export const permanentTideHeightM = (latDeg: number): number => {
  const s = Math.sin((latDeg * Math.PI) / 180);
  return 0.099 - 0.296 * s * s;
};

/** ζ in `to` minus ζ in `from` [m]. */
export function quasigeoidShiftM(latDeg: number, from: TideSystem, to: TideSystem, k = PERMANENT_TIDE_K): number {
  const d = permanentTideHeightM(latDeg);
  const rel = (s: TideSystem) => (s === 'mean-tide' ? d : s === 'zero-tide' ? 0 : -k * d); // relative to zero-tide
  return rel(to) - rel(from);
}

/** Ellipsoidal height of the crust in `to` minus in `from` [m] (mean-tide and zero-tide crusts coincide). */
export function crustShiftM(latDeg: number, from: TideSystem, to: TideSystem, h = PERMANENT_TIDE_H): number {
  const d = permanentTideHeightM(latDeg);
  const rel = (s: TideSystem) => (s === 'tide-free' ? 0 : h * d); // relative to tide-free
  return rel(to) - rel(from);
}

export interface RegisteredSiteHeight {
  latitudeDeg: number;
  ellipsoidalHeightM: number;
  ellipsoidalHeightUncertaintyM: number;
  ellipsoidalCrustSystem: TideSystem | null;
  quasigeoidHeightM: number;
  quasigeoidUncertaintyM: number;
  quasigeoidTideSystem: TideSystem | null;
  /** Same non-null id ⇒ same grid ⇒ correlated ζ errors. */
  quasigeoidGridId: string | null;
  quasigeoidCorrelationLengthKm?: number | null;
}

export interface RegisteredHeightDifference {
  /** H_B − H_A in the target system [m]. */
  deltaH_m: number;
  standardUncertaintyM: number;
  /** What assuming independence would give [m]. */
  standardUncertaintyIndependentM: number;
  rhoQuasigeoid: number;
  rhoEllipsoidal: number;
  /** Per site: H in the target system minus the raw h − ζ [m]. */
  conversionA_m: number;
  conversionB_m: number;
  statement: string;
}

export class TideSystemNotStated extends Error {
  constructor(readonly which: string[]) {
    super(`tide system not stated: ${which.join(', ')}`);
    this.name = 'TideSystemNotStated';
  }
}

/** H in `target`: h converted to the target's crust, ζ to the target system, H = h − ζ. */
export function normalHeightIn(s: RegisteredSiteHeight, target: TideSystem): { heightM: number; conversionM: number } {
  if (s.ellipsoidalCrustSystem === null || s.quasigeoidTideSystem === null) throw new TideSystemNotStated([...(s.ellipsoidalCrustSystem === null ? ['ellipsoidal height (crust system)'] : []), ...(s.quasigeoidTideSystem === null ? ['quasigeoid height'] : [])]);
  const dh = crustShiftM(s.latitudeDeg, s.ellipsoidalCrustSystem, target);
  const dz = quasigeoidShiftM(s.latitudeDeg, s.quasigeoidTideSystem, target);
  return { heightM: s.ellipsoidalHeightM + dh - (s.quasigeoidHeightM + dz), conversionM: dh - dz };
}

export function registeredHeightDifference(
  a: RegisteredSiteHeight,
  b: RegisteredSiteHeight,
  distanceKm: number,
  target: TideSystem,
  rhoEllipsoidal = 0,
): RegisteredHeightDifference {
  const missing: string[] = [];
  for (const [name, s] of [['site A', a], ['site B', b]] as const) {
    if (s.ellipsoidalCrustSystem === null) missing.push(`${name}: crust system of the ellipsoidal height`);
    if (s.quasigeoidTideSystem === null) missing.push(`${name}: tide system of the quasigeoid height`);
  }
  if (missing.length) throw new TideSystemNotStated(missing);
  const ha = normalHeightIn(a, target);
  const hb = normalHeightIn(b, target);
  const sameGrid = a.quasigeoidGridId !== null && a.quasigeoidGridId === b.quasigeoidGridId;
  const length = a.quasigeoidCorrelationLengthKm ?? DEFAULT_QUASIGEOID_CORRELATION_LENGTH_KM;
  const rhoZ = sameGrid ? Math.exp(-Math.max(distanceKm, 0) / length) : 0;
  const vh = a.ellipsoidalHeightUncertaintyM ** 2 + b.ellipsoidalHeightUncertaintyM ** 2;
  const vz = a.quasigeoidUncertaintyM ** 2 + b.quasigeoidUncertaintyM ** 2;
  const cov = 2 * rhoEllipsoidal * a.ellipsoidalHeightUncertaintyM * b.ellipsoidalHeightUncertaintyM + 2 * rhoZ * a.quasigeoidUncertaintyM * b.quasigeoidUncertaintyM;
  const u = Math.sqrt(Math.max(vh + vz - cov, 0));
  const statement = `${sameGrid ? `ζ from one grid: ρ = exp(−d/L) = ${rhoZ.toFixed(3)} with d = ${distanceKm.toFixed(1)} km, L = ${length} km${a.quasigeoidCorrelationLengthKm ? '' : ' (default)'}` : 'ζ from different sources: taken as independent (ρ = 0)'}; ellipsoidal heights ρ = ${rhoEllipsoidal}${rhoEllipsoidal === 0 ? ' (independent determinations, default)' : ''}; heights converted to ${target} (Ekman 1989; Mäkinen & Ihde 2009).`;
  return {
    deltaH_m: hb.heightM - ha.heightM,
    standardUncertaintyM: u,
    standardUncertaintyIndependentM: Math.sqrt(vh + vz),
    rhoQuasigeoid: rhoZ,
    rhoEllipsoidal,
    conversionA_m: ha.conversionM,
    conversionB_m: hb.conversionM,
    statement,
  };
}
