// Benchmark of the levelling-network adjustment on planar-like networks (≈ 3 sections per benchmark).
// Run: npx tsx tests/bench/adjustment.bench.ts  — prints times and peak RSS; it does not pass or fail.

import { adjustNetwork, type AdjustmentStage } from '../../server/science/adjustment/gauss-markov';
import { loopMisclosures } from '../../server/science/adjustment/loops';
import { gridNetwork } from '../unit/adjustment/network-fixtures';

let peakRss = 0;
const sample = (): void => {
  peakRss = Math.max(peakRss, process.memoryUsage().rss);
};
const sampler = setInterval(sample, 20);

const sizes = process.argv.slice(2).map(Number).filter((n) => n > 0);
const benchmarks = sizes.length > 0 ? sizes : [1_000, 10_000, 30_000];

console.log('benchmarks  observations  unknowns  nnz(L)      total ms  stages (ms)                                              loops ms  peak RSS MB');
for (const n of benchmarks) {
  const net = gridNetwork(1234 + n, n);
  sample();
  const stageStart = new Map<AdjustmentStage, number>();
  const stageOrder: AdjustmentStage[] = [];
  const t0 = performance.now();
  const res = adjustNetwork({
    points: net.points,
    observations: net.observations,
    options: {
      onProgress: (_f, stage) => {
        sample();
        if (!stageStart.has(stage)) {
          stageStart.set(stage, performance.now());
          stageOrder.push(stage);
        }
      },
    },
  });
  const t1 = performance.now();
  sample();
  const stageMs = stageOrder.map((s, i) => {
    const end = i + 1 < stageOrder.length ? (stageStart.get(stageOrder[i + 1]) as number) : t1;
    return `${s.split(' ')[0]} ${(end - (stageStart.get(s) as number)).toFixed(0)}`;
  });
  const l0 = performance.now();
  const loops = loopMisclosures(net.observations);
  const l1 = performance.now();
  sample();
  console.log(
    [
      String(n).padStart(10),
      String(net.observations.length).padStart(13),
      String(res.unknowns).padStart(9),
      String(res.factorNonZeros).padStart(10),
      (t1 - t0).toFixed(0).padStart(10),
      ' ' + stageMs.join(', ').padEnd(56),
      (l1 - l0).toFixed(0).padStart(7),
      (peakRss / 2 ** 20).toFixed(0).padStart(11),
    ].join(' '),
  );
  console.log(
    `            σ̂0 = ${res.sigma0?.toFixed(3)}, dof = ${res.degreesOfFreedom}, global test passed = ${res.globalTest?.passed}, ` +
      `suspects = ${res.snooping.suspects.length}, loops = ${loops.loops.length}`,
  );
}
clearInterval(sampler);
