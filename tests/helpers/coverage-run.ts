// Coverage of y ± U over simulated campaigns (JCGM 101:2008 §7: propagate by simulation, compare with the known input):
// "before" is the estimator of result revision 2 with k = 2, "after" the current one with k = t_p(ν_eff).
import { meanWithStatisticalUncertainty, stabilityAnalysis } from '../../server/science/stability';
import { COVERAGE_PROBABILITY_K2, coverageFactorFor } from '../../server/science/uncertainty';
import { meanWithStatisticalUncertainty as legacyMean, stabilityAnalysis as legacyAnalysis } from './legacy-stability';
import { simulateCampaign, type CoverageCase } from './power-law-noise';

export interface CoverageTally {
  kind: CoverageCase;
  campaigns: number;
  before: number;
  after: number;
  /** Root-mean-square error of ȳ about the injected value, and the mean u(ȳ) after, to see whether u is honest. */
  rmsError: number;
  meanUncertaintyAfter: number;
  meanUncertaintyBefore: number;
  meanK: number;
}

export function runCoverage(kind: CoverageCase, campaigns: number, samples: number, firstSeed: number): CoverageTally {
  let before = 0;
  let after = 0;
  let sq = 0;
  let su = 0;
  let sub = 0;
  let sk = 0;
  for (let r = 0; r < campaigns; r++) {
    const c = simulateCampaign(kind, samples, firstSeed + r);
    const points = stabilityAnalysis({ y: c.y, valid: c.valid, tau0Seconds: c.tau0Seconds });
    const now = meanWithStatisticalUncertainty({ y: c.y, valid: c.valid, tau0Seconds: c.tau0Seconds, points });
    const k = coverageFactorFor(now.degreesOfFreedom ?? Infinity, COVERAGE_PROBABILITY_K2);
    const error = now.mean - c.injected;
    if (Math.abs(error) <= k * now.statisticalUncertainty!) after++;
    const old = legacyMean({ y: c.y, valid: c.valid, tau0Seconds: c.tau0Seconds, points: legacyAnalysis({ y: c.y, valid: c.valid, tau0Seconds: c.tau0Seconds }) });
    if (Math.abs(old.mean - c.injected) <= 2 * old.statisticalUncertainty!) before++;
    sq += error * error;
    su += now.statisticalUncertainty!;
    sub += old.statisticalUncertainty!;
    sk += k;
  }
  return {
    kind, campaigns, before: before / campaigns, after: after / campaigns, rmsError: Math.sqrt(sq / campaigns),
    meanUncertaintyAfter: su / campaigns, meanUncertaintyBefore: sub / campaigns, meanK: sk / campaigns,
  };
}
