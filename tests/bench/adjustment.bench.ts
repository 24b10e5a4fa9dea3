// Benchmark of the levelling-network adjustment on planar-like networks (≈ 3 sections per benchmark).
// Run: npx tsx tests/bench/adjustment.bench.ts [sizes…] — prints times, peak RSS and the longest interval between
// two progress reports (start and end included); it does not pass or fail. Targets at 100 000 benchmarks / ≈ 300 000
// observations: < 10 s, RSS < 2 GB, progress at least every second.

import { adjustNetwork, type AdjustmentStage } from '../../server/science/adjustment/gauss-markov';
import { loopMisclosures } from '../../server/science/adjustment/loops';
import { gridNetwork } from '../unit/adjustment/network-fixtures';
import { reportFigure } from './figures';

let peakRss = 0;
const sample = (): void => {
  peakRss = Math.max(peakRss, process.memoryUsage().rss);
};
const sampler = setInterval(sample, 20);

const sizes = process.argv.slice(2).map(Number).filter((n) => n > 0);
const benchmarks = sizes.length > 0 ? sizes : [1_000, 10_000, 30_000, 100_000];

console.log('benchmarks  observations  unknowns  nnz(L)      total ms  stages (ms)                                              loops ms  peak RSS MB  longest progress gap ms');
for (const n of benchmarks) {
  const net = gridNetwork(1234 + n, n);
  sample();
  const stageStart = new Map<AdjustmentStage, number>();
  const stageOrder: AdjustmentStage[] = [];
  const t0 = performance.now();
  let lastReport = t0;
  let longestGap = 0;
  const res = adjustNetwork({
    points: net.points,
    observations: net.observations,
    options: {
      onProgress: (_f, stage) => {
        const now = performance.now();
        longestGap = Math.max(longestGap, now - lastReport);
        lastReport = now;
        sample();
        if (!stageStart.has(stage)) {
          stageStart.set(stage, performance.now());
          stageOrder.push(stage);
        }
      },
    },
  });
  const t1 = performance.now();
  longestGap = Math.max(longestGap, t1 - lastReport);
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
      longestGap.toFixed(0).padStart(24),
    ].join(' '),
  );
  if (n === benchmarks[benchmarks.length - 1]) {
    const tag = `${n.toLocaleString('en')} benchmarks / ${net.observations.length.toLocaleString('en')} observations`;
    const big = n >= 100_000;
    reportFigure({ figure: `levelling adjustment, ${tag}`, measured: `${((t1 - t0) / 1000).toFixed(2)} s`, target: '< 10 s at 100 000', met: big ? t1 - t0 < 10_000 : null });
    reportFigure({ figure: `  peak RSS of that adjustment (whole process)`, measured: `${(peakRss / 2 ** 20).toFixed(0)} MB`, target: '< 2 GB', met: big ? peakRss < 2 * 2 ** 30 : null });
    reportFigure({ figure: `  longest interval between progress reports`, measured: `${longestGap.toFixed(0)} ms`, target: '≤ 1000 ms', met: longestGap <= 1000 });
  }
  console.log(
    `            σ̂0 = ${res.sigma0?.toFixed(3)}, dof = ${res.degreesOfFreedom}, global test passed = ${res.globalTest?.passed}, ` +
      `suspects = ${res.snooping.suspects.length}, loops = ${loops.loops.length}`,
  );
}
clearInterval(sampler);
