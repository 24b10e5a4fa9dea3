// Monte Carlo of repeated clock campaigns between the same two sites plus a levelling line (JCGM 101:2008 §7:
// propagate the distributions by simulation, then count how often the stated interval holds the true value).
// Generator: mulberry32 + Box–Muller (network-fixtures.ts). Each trial draws the shared effects once (clock A and
// clock B budget versions, the fibre link) and the campaigns' own statistical noise anew for every campaign.

import { adjustNetwork, type NetworkObservation, type SharedParameter } from '../../../server/science/adjustment/gauss-markov';
import { mulberry32, normalDeviate } from './network-fixtures';

export interface CoverageScenario {
  trials: number;
  seed: number;
  /** Campaigns of the same clock pair over the same link. */
  campaigns: number;
  /** Own (statistical) standard uncertainty of one campaign's ΔC [m²/s²]. */
  ownSigma: number;
  /** Standard uncertainties of the shared terms [m²/s²]: clock A budget, clock B budget, link. */
  clockA: number;
  clockB: number;
  link: number;
  /** Levelling: sections of the line between the two sites' benchmarks, each with this σ [m²/s²]. */
  sections: number;
  sectionSigma: number;
  /** Coverage factor of the interval ΔC ± k·σ. */
  k: number;
}

export interface CoverageFigures {
  trials: number;
  /** Fraction of trials whose interval held the true adjusted difference, observations treated as independent. */
  independent: number;
  /** The same with the shared terms as shared parameters. */
  shared: number;
  meanSigmaIndependent: number;
  meanSigmaShared: number;
}

export function networkCoverage(s: CoverageScenario): CoverageFigures {
  const rand = mulberry32(s.seed);
  const trueDelta = 5_880; // ≈ 600 m of height [m²/s²]
  const sharedParams: SharedParameter[] = [
    { name: 'clock A', sigma: s.clockA },
    { name: 'clock B', sigma: s.clockB },
    { name: 'link', sigma: s.link },
  ];
  const fullSigma = Math.sqrt(s.ownSigma ** 2 + s.clockA ** 2 + s.clockB ** 2 + s.link ** 2);
  let hitI = 0;
  let hitS = 0;
  let sumI = 0;
  let sumS = 0;
  for (let t = 0; t < s.trials; t++) {
    const eA = s.clockA * normalDeviate(rand);
    const eB = s.clockB * normalDeviate(rand);
    const eL = s.link * normalDeviate(rand);
    const points = [{ code: 'BM-A', fixedC: 1_000 }, ...Array.from({ length: s.sections - 1 }, (_, i) => ({ code: `L${i}` })), { code: 'SITE-B' }];
    const trueC = points.map((_, i) => 1_000 + (trueDelta * i) / s.sections);
    const levelling: NetworkObservation[] = [];
    for (let i = 0; i < s.sections; i++) {
      levelling.push({ from: points[i].code, to: points[i + 1].code, deltaC: trueC[i + 1] - trueC[i] + s.sectionSigma * normalDeviate(rand), sigma: s.sectionSigma, kind: 'levelling' });
    }
    const clockObs = Array.from({ length: s.campaigns }, () => trueDelta + eB - eA + eL + s.ownSigma * normalDeviate(rand));
    const independent = adjustNetwork({
      points,
      observations: [...levelling, ...clockObs.map((d): NetworkObservation => ({ from: 'BM-A', to: 'SITE-B', deltaC: d, sigma: fullSigma, kind: 'clock' }))],
      options: { differences: [{ from: 'BM-A', to: 'SITE-B' }], snooping: 'none' },
    });
    const shared = adjustNetwork({
      points,
      observations: [
        ...levelling,
        ...clockObs.map((d): NetworkObservation => ({
          from: 'BM-A', to: 'SITE-B', deltaC: d, sigma: s.ownSigma, kind: 'clock',
          terms: [{ name: 'clock A', coefficient: -1 }, { name: 'clock B', coefficient: 1 }, { name: 'link', coefficient: 1 }],
        })),
      ],
      options: { differences: [{ from: 'BM-A', to: 'SITE-B' }], sharedParameters: sharedParams, snooping: 'none' },
    });
    const di = independent.differences[0];
    const ds = shared.differences[0];
    if (Math.abs(di.deltaC - trueDelta) <= s.k * di.sigma) hitI++;
    if (Math.abs(ds.deltaC - trueDelta) <= s.k * ds.sigma) hitS++;
    sumI += di.sigma;
    sumS += ds.sigma;
  }
  return { trials: s.trials, independent: hitI / s.trials, shared: hitS / s.trials, meanSigmaIndependent: sumI / s.trials, meanSigmaShared: sumS / s.trials };
}
