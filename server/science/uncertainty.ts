// Uncertainty budgets after the GUM, JCGM 100:2008: contributions u_i(y) = |c_i|·u(x_i) (§5.1.3),
// combined standard uncertainty for uncorrelated inputs (eq. 10), expanded U = k·u_c (§6.2), and
// effective degrees of freedom by the Welch–Satterthwaite formula (Annex G.4, eq. G.2b) and the coverage factor
// k = t_p(ν_eff) from the Student t distribution (G.3, G.6.4), ν_eff truncated to the next lower integer (G.4.1 note).

import { studentTQuantile } from './distributions';
import { ScienceInputError } from './errors';

/** p of the normal "k = 2" interval, 2Φ(2) − 1 = 95.45 % (JCGM 100:2008 G.1.3, Table G.1), so that ν_eff → ∞ gives k = 2 exactly. */
export const COVERAGE_PROBABILITY_K2 = 0.9544997361036416;

/** Degrees of freedom above which t_p(ν) is taken as the normal quantile: t_95.45(ν) − 2 < 0.005 for ν > 400 (Table G.2 trend). */
const LARGE_DOF = 1e6;

/**
 * Coverage factor for a coverage probability p: k_p = t_p(ν_eff) with ν_eff truncated to the next lower integer
 * (JCGM 100:2008 G.4.1, G.6.4); the normal quantile when ν_eff is infinite or very large (G.6.6: k = 2 for p ≈ 95 %).
 */
export function coverageFactorFor(effectiveDegreesOfFreedom: number, coverageProbability = COVERAGE_PROBABILITY_K2): number {
  if (!(coverageProbability > 0 && coverageProbability < 1)) throw new ScienceInputError('coverageProbability', 'must lie strictly between 0 and 1');
  if (!(effectiveDegreesOfFreedom > 0)) throw new ScienceInputError('effectiveDegreesOfFreedom', 'must be positive');
  const q = (1 + coverageProbability) / 2;
  if (effectiveDegreesOfFreedom >= LARGE_DOF) return studentTQuantile(q, Infinity);
  // Below one degree of freedom the truncation would give 0; G.6.4 truncates, so ν < 1 keeps its fractional value.
  const nu = effectiveDegreesOfFreedom >= 1 ? Math.floor(effectiveDegreesOfFreedom) : effectiveDegreesOfFreedom;
  return studentTQuantile(q, nu);
}

export interface BudgetComponent {
  name: string;
  type: 'A' | 'B';
  /** Estimate of the input quantity, if the budget lists it. */
  value?: number;
  standardUncertainty: number;
  /** Sensitivity coefficient c_i = ∂f/∂x_i. */
  sensitivity: number;
  unit: string;
  /** Degrees of freedom of u(x_i); omitted or Infinity for a well-known Type B component. */
  degreesOfFreedom?: number;
}

export interface BudgetLine {
  name: string;
  type: 'A' | 'B';
  contribution: number;
  /** Share of u_c² carried by this line (0…1). */
  varianceShare: number;
}

export interface BudgetResult {
  lines: BudgetLine[];
  combinedStandardUncertainty: number;
  coverageFactor: number;
  /** p of the interval y ± U; null when a fixed k was asked for. */
  coverageProbability: number | null;
  expandedUncertainty: number;
  /** Welch–Satterthwaite ν_eff; Infinity when no component states finite degrees of freedom. */
  effectiveDegreesOfFreedom: number;
  correlation: 'inputs treated as uncorrelated (JCGM 100:2008 eq. 10)';
}

/** Root sum of squares, overflow-safe. */
export function rss(values: readonly number[]): number {
  return Math.hypot(...values);
}

/**
 * Combines a budget. `coverage` is either the coverage probability p (k = t_p(ν_eff), the default p = 95.45 %) or
 * `{ fixedCoverageFactor }` for a stated k regardless of ν_eff.
 */
export function combineBudget(
  components: readonly BudgetComponent[],
  coverage: { coverageProbability?: number } | { fixedCoverageFactor: number } = {},
): BudgetResult {
  const fixed = 'fixedCoverageFactor' in coverage ? coverage.fixedCoverageFactor : null;
  if (fixed !== null && !(fixed > 0)) throw new ScienceInputError('coverageFactor', 'must be positive');
  components.forEach((c, i) => {
    if (!(c.standardUncertainty >= 0) || !Number.isFinite(c.standardUncertainty)) {
      throw new ScienceInputError(`components[${i}].standardUncertainty`, 'must be a finite non-negative number');
    }
    if (!Number.isFinite(c.sensitivity)) throw new ScienceInputError(`components[${i}].sensitivity`, 'must be finite');
    if (c.degreesOfFreedom !== undefined && !(c.degreesOfFreedom > 0)) {
      throw new ScienceInputError(`components[${i}].degreesOfFreedom`, 'must be positive');
    }
  });
  const contributions = components.map((c) => Math.abs(c.sensitivity) * c.standardUncertainty);
  const uc = rss(contributions);
  const uc2 = uc * uc;
  let denominator = 0;
  components.forEach((c, i) => {
    const dof = c.degreesOfFreedom ?? Infinity;
    if (Number.isFinite(dof)) denominator += contributions[i] ** 4 / dof;
  });
  const nuEff = denominator > 0 ? (uc2 * uc2) / denominator : Infinity;
  const probability = fixed === null ? (('coverageProbability' in coverage ? coverage.coverageProbability : undefined) ?? COVERAGE_PROBABILITY_K2) : null;
  const coverageFactor = fixed ?? coverageFactorFor(Number.isNaN(nuEff) ? Infinity : nuEff, probability!);
  return {
    lines: components.map((c, i) => ({
      name: c.name,
      type: c.type,
      contribution: contributions[i],
      varianceShare: uc2 > 0 ? contributions[i] ** 2 / uc2 : 0,
    })),
    combinedStandardUncertainty: uc,
    coverageFactor,
    coverageProbability: probability,
    expandedUncertainty: coverageFactor * uc,
    effectiveDegreesOfFreedom: nuEff,
    correlation: 'inputs treated as uncorrelated (JCGM 100:2008 eq. 10)',
  };
}
