import { describe, expect, it } from 'vitest';
import { runCoverage } from '../../helpers/coverage-run';
import { COVERAGE_CASES } from '../../helpers/power-law-noise';

// Reduced Monte Carlo coverage check (JCGM 101:2008 §7) with fixed seeds: 300 simulated campaigns of 2048 samples per noise
// type, each with a known injected offset; the fraction of intervals ȳ ± k·u(ȳ) that contain it.
// Binomial band: if the true coverage is p = 95.45 %, the observed fraction of n = 300 has σ = √(p(1 − p)/n) = 1.20 %;
// ±3.29σ (two-sided 99.9 %) gives 91.5 % … 99.4 %. A correct estimator leaves this band with probability 0.1 % per type;
// the estimator before (k = 2, ADEV at one τ) falls below it for the flicker cases.
const CAMPAIGNS = 300;
const SAMPLES = 2048;
const P = 0.9545;
const HALF_WIDTH = 3.29 * Math.sqrt((P * (1 - P)) / CAMPAIGNS);

describe('coverage of the statistical interval of the mean (Monte Carlo, fixed seeds)', () => {
  it.each(COVERAGE_CASES.map((kind, i) => [kind, i] as const))('%s', (kind, i) => {
    const t = runCoverage(kind, CAMPAIGNS, SAMPLES, 7_000 + 1_000 * i);
    expect(t.after).toBeGreaterThan(P - HALF_WIDTH);
    expect(t.after).toBeLessThan(P + HALF_WIDTH);
    if (kind === 'flicker FM' || kind === 'white FM + flicker-FM floor') expect(t.before).toBeLessThan(P - HALF_WIDTH);
  });
});
