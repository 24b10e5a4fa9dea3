// Gravitational redshift between two clocks to first order in 1/c²: y = ΔC / c² (Einstein; see e.g.
// Mehlstäubler et al. 2018, Rep. Prog. Phys. 81:064401 for the chronometric-levelling form), with
// C = W0 − W the geopotential number, and ΔC turned into a normal-height difference with mean normal gravity.
//
// Convention used everywhere in Chronolevel:
//   measured ratio R = ν_B / ν_A and reference ratio R0 = ν_B0 / ν_A0 (both clocks' frequencies as seen by one observer),
//   y = R/R0 − 1 = (ν_B − ν_A)/ν_A  (with the reference removed),
//   ΔC = C_B − C_A = c²·y.
// A clock higher in the field (larger C, less negative W) ticks faster, so y > 0 and ΔC > 0 mean B is above A.

import { C2_M2_PER_S2 } from './constants';
import { fractionalOffset } from './fractional-offset';
import { cFromNormalHeight, meanNormalGravity, normalHeightFromC } from './normal-gravity';

export interface PotentialDifference {
  deltaC_m2s2: number;
  uDeltaC_m2s2: number | null;
}

export function potentialDifferenceFromY(y: number, uY?: number | null): PotentialDifference {
  return {
    deltaC_m2s2: C2_M2_PER_S2 * y,
    uDeltaC_m2s2: uY === undefined || uY === null ? null : C2_M2_PER_S2 * Math.abs(uY),
  };
}

export interface HeightDifference {
  deltaH_m: number;
  uDeltaH_m: number | null;
  /** Normal height of B: H_B = H_N(C_A + ΔC), both at the same latitude. */
  heightB_m: number;
}

/**
 * Normal-height difference H_B − H_A for a potential difference, with A at normal height heightA_m and both
 * clocks taken at the latitude latDeg (the mean normal gravity changes by ~5e-3 relative over 90° of latitude,
 * so distant sites should be handled through their own C values instead).
 */
export function heightDifferenceFromDeltaC(
  deltaC_m2s2: number,
  latDeg: number,
  heightA_m = 0,
  uDeltaC_m2s2: number | null = null,
): HeightDifference {
  const cA = cFromNormalHeight(heightA_m, latDeg);
  const heightB_m = normalHeightFromC(cA + deltaC_m2s2, latDeg);
  // dH/dC = 1/γ̄ to the precision that matters for an uncertainty.
  const gammaBar = meanNormalGravity(latDeg, heightB_m);
  return {
    deltaH_m: heightB_m - heightA_m,
    uDeltaH_m: uDeltaC_m2s2 === null ? null : uDeltaC_m2s2 / gammaBar,
    heightB_m,
  };
}

export interface RedshiftInput {
  ratio: string;
  referenceRatio?: string;
  /** Standard uncertainty of y (dimensionless), if known. */
  fractionalUncertainty?: number | null;
  latitudeDeg: number;
  /** Normal height of clock A, m. */
  normalHeightM?: number;
}

export interface QuantityWithUnit<U extends string> {
  value: number;
  uncertainty: number | null;
  unit: U;
}

export interface RedshiftResult {
  fractionalOffset: { value: number; decimal: string; uncertainty: number | null };
  potentialDifference: QuantityWithUnit<'m2/s2'>;
  heightDifference: QuantityWithUnit<'m'>;
}

export function redshiftCalculator(input: RedshiftInput): RedshiftResult {
  const offset = fractionalOffset(input.ratio, input.referenceRatio ?? '1');
  const uY = input.fractionalUncertainty ?? null;
  const potential = potentialDifferenceFromY(offset.y, uY);
  const height = heightDifferenceFromDeltaC(potential.deltaC_m2s2, input.latitudeDeg, input.normalHeightM ?? 0, potential.uDeltaC_m2s2);
  return {
    fractionalOffset: { value: offset.y, decimal: offset.yDecimal, uncertainty: uY },
    potentialDifference: { value: potential.deltaC_m2s2, uncertainty: potential.uDeltaC_m2s2, unit: 'm2/s2' },
    heightDifference: { value: height.deltaH_m, uncertainty: height.uDeltaH_m, unit: 'm' },
  };
}
