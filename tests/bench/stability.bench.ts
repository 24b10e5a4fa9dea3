// Benchmark: octave-τ stability analysis (OADEV, ADEV, MDEV, TDEV, EDF intervals, noise id) of 1 000 000 samples.
// Run with `npx tsx tests/bench/stability.bench.ts`; prints figures, never fails on time.
import { meanWithStatisticalUncertainty, stabilityAnalysis } from '../../server/science/stability';

function whiteFm(n: number, seed: number): Float64Array {
  let a = seed >>> 0;
  const uniform = (): number => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
  const y = new Float64Array(n);
  for (let i = 0; i < n; i++) y[i] = 1e-15 * Math.sqrt(-2 * Math.log(1 - uniform())) * Math.cos(2 * Math.PI * uniform());
  return y;
}

const points = 1_000_000;
const y = whiteFm(points, 42);
const valid = new Uint8Array(points).fill(1);
for (let i = 400_000; i < 403_600; i++) valid[i] = 0; // one hour of dead time

for (let run = 0; run < 2; run++) stabilityAnalysis({ y, tau0Seconds: 1 }); // warm-up (JIT)

const runs = 5;
const times: number[] = [];
let tauCount = 0;
for (let run = 0; run < runs; run++) {
  const t0 = performance.now();
  const result = stabilityAnalysis({ y, tau0Seconds: 1, valid });
  times.push(performance.now() - t0);
  tauCount = result.length;
}
times.sort((a, b) => a - b);
const t0 = performance.now();
meanWithStatisticalUncertainty({ y, tau0Seconds: 1, valid });
const meanMs = performance.now() - t0;
console.log(`stabilityAnalysis: ${points} points, ${tauCount} octave τ, with a gap: median ${times[Math.floor(runs / 2)].toFixed(1)} ms, best ${times[0].toFixed(1)} ms`);
console.log(`meanWithStatisticalUncertainty (includes its own analysis): ${meanMs.toFixed(1)} ms`);
