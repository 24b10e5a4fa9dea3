// Network Monte Carlo coverage (JCGM 101:2008 §7): repeated clock campaigns of the same clock pair over one link plus a
// levelling line; the fraction of simulated networks whose adjusted ΔC ± k·σ (k = 2) holds the true value, with the
// campaigns treated as independent rows (before) and with the shared terms as shared parameters (after).
// Run: npm run bench -- network-coverage. Prints figures; it passes or fails on nothing.

import { networkCoverage, type CoverageScenario } from '../unit/adjustment/network-coverage-sim';

const trials = Number(process.argv[2] ?? 2000);
const base: Omit<CoverageScenario, 'campaigns' | 'sectionSigma' | 'seed'> = { trials, ownSigma: 0.6, clockA: 1.0, clockB: 1.2, link: 0.3, sections: 6, k: 2 };
const cases: [string, number, number][] = [
  ['1 campaign, weak levelling (σ_line 2.9 m²/s²)', 1, 1.2],
  ['4 campaigns, weak levelling', 4, 1.2],
  ['8 campaigns, weak levelling', 8, 1.2],
  ['4 campaigns, strong levelling (σ_line 0.49 m²/s²)', 4, 0.2],
];
const binomial = (p: number) => Math.sqrt((p * (1 - p)) / trials);
console.log(`trials per case: ${trials}; shared terms σ: clock A ${base.clockA}, clock B ${base.clockB}, link ${base.link} m²/s²; own σ ${base.ownSigma} m²/s²; k = 2 (p = 95.45 % if the model is right)`);
console.log('case                                                independent (before)   shared parameters (after)   mean σ before / after (m²/s²)');
let seed = 101;
for (const [label, campaigns, sectionSigma] of cases) {
  const t0 = performance.now();
  const f = networkCoverage({ ...base, campaigns, sectionSigma, seed: seed++ });
  const ms = performance.now() - t0;
  console.log(
    `${label.padEnd(52)}${(100 * f.independent).toFixed(1).padStart(6)} % ± ${(100 * binomial(f.independent)).toFixed(1)}        ${(100 * f.shared).toFixed(1).padStart(6)} % ± ${(100 * binomial(f.shared)).toFixed(1)}            ${f.meanSigmaIndependent.toFixed(3)} / ${f.meanSigmaShared.toFixed(3)}   (${ms.toFixed(0)} ms)`,
  );
}

// Levelled ΔC between two sites far from the fixed benchmark (a 300 km line of 30 sections, the sites 10 km apart at
// its end): coverage of ΔC ± 2σ with σ from the covariance versus the root-sum-square √(σ_A² + σ_B²).
import { adjustNetwork } from '../../server/science/adjustment/gauss-markov';
import { mulberry32, normalDeviate } from '../unit/adjustment/network-fixtures';

{
  const rand = mulberry32(4242);
  const n = 30;
  const sigma = 0.001 * Math.sqrt(10) * 9.81;
  let hitCov = 0;
  let hitRss = 0;
  let ratio = 0;
  const runs = Math.min(trials, 2000);
  for (let t = 0; t < runs; t++) {
    const points = Array.from({ length: n + 1 }, (_, i) => (i === 0 ? { code: 'P0', fixedC: 0 } : { code: `P${i}` }));
    const observations = Array.from({ length: n }, (_, i) => ({ from: `P${i}`, to: `P${i + 1}`, deltaC: 98.1 + sigma * normalDeviate(rand), sigma }));
    // a second, parallel line doubles the redundancy so the covariance is not trivial
    for (let i = 0; i < n; i += 3) observations.push({ from: `P${i}`, to: `P${Math.min(i + 3, n)}`, deltaC: 98.1 * (Math.min(i + 3, n) - i) + sigma * Math.sqrt(3) * normalDeviate(rand), sigma: sigma * Math.sqrt(3) });
    const res = adjustNetwork({ points, observations, options: { differences: [{ from: `P${n - 1}`, to: `P${n}` }], snooping: 'none' } });
    const d = res.differences[0];
    if (Math.abs(d.deltaC - 98.1) <= 2 * d.sigma) hitCov++;
    if (Math.abs(d.deltaC - 98.1) <= 2 * d.sigmaIgnoringCovariance) hitRss++;
    ratio += d.sigmaIgnoringCovariance / d.sigma;
  }
  console.log(`\nlevelled ΔC of two sites 10 km apart at the end of a 300 km line (${runs} trials): coverage with covariance ${(100 * hitCov / runs).toFixed(1)} %, with √(σ_A² + σ_B²) ${(100 * hitRss / runs).toFixed(1)} % (σ overstated ${(ratio / runs).toFixed(1)}×)`);
}
