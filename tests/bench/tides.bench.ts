// Benchmark: clock tidal potential for 1 000 000 one-second epochs (grid + cubic interpolation of Moon/Sun positions).
// Run with `npx tsx tests/bench/tides.bench.ts`; prints figures, never fails on time.
import { tidePotentialAt, tidePotentialSeries } from '../../server/science/tides';

const site = { latitudeDeg: 52.3, longitudeDeg: 7.4, ellipsoidalHeightM: 80 };
const points = 1_000_000;
const epochs = Float64Array.from({ length: points }, (_, i) => 60_000 + i / 86_400);
tidePotentialSeries(site, epochs.subarray(0, 10_000)); // warm-up (JIT)
const times: number[] = [];
let series: Float64Array = new Float64Array(0);
for (let run = 0; run < 3; run++) {
  const t0 = performance.now();
  series = tidePotentialSeries(site, epochs, { removePermanent: true });
  times.push(performance.now() - t0);
}
times.sort((a, b) => a - b);
let maxError = 0;
for (let i = 0; i < points; i += 997) {
  maxError = Math.max(maxError, Math.abs(series[i] - tidePotentialAt(site, epochs[i], { removePermanent: true }).clock_m2s2));
}
console.log(`tidePotentialSeries: ${points} epochs (11.6 days at 1 s): median ${times[1].toFixed(1)} ms, best ${times[0].toFixed(1)} ms`);
console.log(`max |interpolated − direct| over ${Math.ceil(points / 997)} epochs: ${maxError.toExponential(2)} m²/s²`);
