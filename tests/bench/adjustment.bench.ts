// Benchmark of the levelling-network adjustment on planar-like networks (≈ 3 sections per benchmark), run the way the
// job runs it: stored-inputs JSON into the adjustment worker thread (server/network/adjustment-thread.ts), progress
// through the same throttle the job uses to write job_progress (here the "write" records its time instead of going to
// PostgreSQL). Run: npx tsx tests/bench/adjustment.bench.ts [sizes…] — prints times per stage, peak RSS of the whole
// process (threads included; reset per size where Linux allows) and the longest interval between two progress writes (start and end included); it does
// not pass or fail. It also prints the CPU time of the process over the same interval. Targets at 100 000 benchmarks / ≈ 300 000 observations: < 10 s, RSS < 2 GB, progress ≤ 1 s apart.

import fs from 'node:fs';
import type { StoredInputs } from '../../server/network/adjustment.service';
import { runInThread } from '../../server/network/adjustment-thread';
import { throttledProgress } from '../../server/jobs/progress';
import { loopMisclosures } from '../../server/science/adjustment/loops';
import { gridNetwork } from '../unit/adjustment/network-fixtures';
import { peakRssMb, reportFigure } from './figures';

const sizes = process.argv.slice(2).map(Number).filter((n) => n > 0);
const benchmarks = sizes.length > 0 ? sizes : [10_000, 30_000, 100_000];

console.log('benchmarks  observations  result MB   total ms  stages (ms)                                                                    loops ms  peak RSS MB  longest write gap ms');
/** Each size's own peak: collect the previous size's garbage and reset VmHWM (Linux, clear_refs value 5). */
function resetPeak(): void {
  (globalThis as { gc?: () => void }).gc?.();
  try {
    fs.writeFileSync('/proc/self/clear_refs', '5');
  } catch {
    // not Linux, or not allowed: the peak then covers the sizes before as well
  }
}

for (const n of benchmarks) {
  resetPeak();
  const net = gridNetwork(1234 + n, n);
  const inputs: StoredInputs = {
    adjustment: { points: net.points, observations: net.observations },
    pointMeta: Object.fromEntries(net.points.map((p) => [p.code, { kind: 'benchmark' as const, label: p.code, datumName: null, latitudeDeg: 50 }])),
    observationMeta: {},
    clockCampaigns: [],
  };
  const json = JSON.stringify(inputs);
  const stageStart = new Map<string, number>();
  const stageOrder: string[] = [];
  const writes: number[] = [];
  const writeStages: string[] = [];
  const cpu0 = process.cpuUsage();
  const t0 = performance.now();
  writes.push(t0);
  writeStages.push('start');
  // The job's throttle (250 ms); a write takes ~1 ms of PostgreSQL round trip in the job, a tick here.
  const progress = throttledProgress(async (_fraction, stage) => {
    writes.push(performance.now());
    writeStages.push(stage);
    await new Promise((r) => setImmediate(r));
  }, 250);
  const { resultJson, summary } = await runInThread(json, (fraction, stage) => {
    if (!stageStart.has(stage)) {
      stageStart.set(stage, performance.now());
      stageOrder.push(stage);
    }
    progress.report(fraction, stage);
  });
  await progress.flush();
  const t1 = performance.now();
  const cpu = process.cpuUsage(cpu0);
  writes.push(t1);
  writeStages.push('end');
  const resultMb = resultJson.length / 2 ** 20;
  let longestGap = 0;
  let gapAt = '';
  for (let i = 1; i < writes.length; i++) {
    if (writes[i] - writes[i - 1] > longestGap) {
      longestGap = writes[i] - writes[i - 1];
      gapAt = `${writeStages[i - 1]} → ${writeStages[i]}`;
    }
  }
  const stageMs = stageOrder.map((s, i) => {
    const end = i + 1 < stageOrder.length ? (stageStart.get(stageOrder[i + 1]) as number) : t1;
    return `${s.split(' ')[0]} ${(end - (stageStart.get(s) as number)).toFixed(0)}`;
  });
  const l0 = performance.now();
  const loops = loopMisclosures(net.observations);
  const l1 = performance.now();
  const rss = peakRssMb('self');
  console.log(
    [
      String(n).padStart(10),
      String(net.observations.length).padStart(13),
      resultMb.toFixed(0).padStart(9),
      (t1 - t0).toFixed(0).padStart(11),
      ' ' + stageMs.join(', ').padEnd(78),
      (l1 - l0).toFixed(0).padStart(7),
      rss.toFixed(0).padStart(11),
      `${longestGap.toFixed(0).padStart(21)} (${gapAt})`,
    ].join(' '),
  );
  // CPU time of the whole process (both threads) over the same interval: on a shared machine it varies far less with
  // the other work than the wall time does.
  console.log(`            CPU ${((cpu.user + cpu.system) / 1000).toFixed(0)} ms (user ${(cpu.user / 1000).toFixed(0)}, system ${(cpu.system / 1000).toFixed(0)})`);
  if (n === benchmarks[benchmarks.length - 1]) {
    const tag = `${n.toLocaleString('en')} benchmarks / ${net.observations.length.toLocaleString('en')} observations`;
    const big = n >= 100_000;
    reportFigure({ figure: `levelling adjustment (worker thread), ${tag}`, measured: `${((t1 - t0) / 1000).toFixed(2)} s`, target: '< 10 s at 100 000', met: big ? t1 - t0 < 10_000 : null });
    reportFigure({ figure: `  peak RSS of that adjustment (whole process, VmHWM)`, measured: `${rss.toFixed(0)} MB`, target: '< 2 GB', met: big ? rss < 2048 : null });
    reportFigure({ figure: `  longest interval between progress writes`, measured: `${longestGap.toFixed(0)} ms`, target: '≤ 1000 ms', met: longestGap <= 1000 });
  }
  console.log(
    `            σ̂0 = ${summary.sigma0?.toFixed(3)}, dof = ${summary.degreesOfFreedom}, global test passed = ${summary.globalTestPassed}, ` +
      `suspects = ${summary.suspects}, loops = ${loops.loops.length}`,
  );
}
