// Uncertainty budgets after the GUM, JCGM 100:2008: contributions u_i(y) = |c_i|·u(x_i) (§5.1.3),
// combined standard uncertainty for uncorrelated inputs (eq. 10), expanded U = k·u_c (§6.2), and
// effective degrees of freedom by the Welch–Satterthwaite formula (Annex G.4, eq. G.2b).

import { ScienceInputError } from './errors';

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
  expandedUncertainty: number;
  /** Welch–Satterthwaite ν_eff; Infinity when no component states finite degrees of freedom. */
  effectiveDegreesOfFreedom: number;
  correlation: 'inputs treated as uncorrelated (JCGM 100:2008 eq. 10)';
}

/** Root sum of squares, overflow-safe. */
export function rss(values: readonly number[]): number {
  return Math.hypot(...values);
}

export function combineBudget(components: readonly BudgetComponent[], coverageFactor = 2): BudgetResult {
  if (!(coverageFactor > 0)) throw new ScienceInputError('coverageFactor', 'must be positive');
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
  return {
    lines: components.map((c, i) => ({
      name: c.name,
      type: c.type,
      contribution: contributions[i],
      varianceShare: uc2 > 0 ? contributions[i] ** 2 / uc2 : 0,
    })),
    combinedStandardUncertainty: uc,
    coverageFactor,
    expandedUncertainty: coverageFactor * uc,
    effectiveDegreesOfFreedom: denominator > 0 ? uc2 * uc2 / denominator : Infinity,
    correlation: 'inputs treated as uncorrelated (JCGM 100:2008 eq. 10)',
  };
}
