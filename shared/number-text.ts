// Writing a value so that its rounding does not matter beside its uncertainty.

/**
 * y in exponent notation with as many digits as keep the rounding error (half a unit of the last digit) at or below
 * u/10; u ≤ 0 or non-finite gives the shortest round-trip form (common practice: rounding is then the only error shown).
 */
export function formatForUncertainty(value: number, standardUncertainty: number): string {
  if (!Number.isFinite(value)) return String(value);
  if (!(standardUncertainty > 0) || !Number.isFinite(standardUncertainty)) return value.toExponential();
  const decimals = Math.ceil(Math.log10(5 / standardUncertainty));
  const exponent = value === 0 ? Math.floor(Math.log10(standardUncertainty)) : Math.floor(Math.log10(Math.abs(value)));
  const significant = Math.min(100, Math.max(1, decimals + exponent + 1));
  return value.toExponential(significant - 1);
}

/** "k = 2.13, p = 95.45 %, ν_eff = 17" — the three numbers that belong beside every expanded uncertainty. */
export function coverageText(q: { coverageFactor: number; coverageProbability: number; effectiveDegreesOfFreedom: number | null }): string {
  const nu = q.effectiveDegreesOfFreedom === null ? 'infinite' : q.effectiveDegreesOfFreedom >= 100 ? q.effectiveDegreesOfFreedom.toFixed(0) : q.effectiveDegreesOfFreedom.toFixed(1);
  return `k = ${q.coverageFactor.toFixed(2)}, p = ${(100 * q.coverageProbability).toFixed(2)} %, ν_eff = ${nu}`;
}
