// Levelling-section CSV of 29 MB (≈ 400 000 rows, more than the 100 000 accepted) read as a stream: prints the time to
// the answer, the peak RSS of this process and the longest event-loop stall. The former whole-file synchronous parse
// measured 6–14 s and ≈ 630 MB peak RSS on the same input. Figures only; nothing fails on time.
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { monitorEventLoopDelay } from 'node:perf_hooks';
import { parseSectionsStream } from '../../server/network/sections-upload';

const file = path.join(os.tmpdir(), `chronolevel-sections-bench-${process.pid}.csv`);
const fd = fs.openSync(file, 'w');
fs.writeSync(fd, 'line,from,to,delta_h_m,length_km,mean_gravity_ms2,observed_on,forward_m,backward_m\n');
let s = '';
let bytes = 0;
for (let n = 0; bytes < 29 * 1024 * 1024; n++) {
  const l = `Bench line ${n % 50},CD-${String((n % 12) + 1).padStart(2, '0')},CD-${String(((n + 1) % 12) + 1).padStart(2, '0')},1.2345,3.21,9.80665,2024-05-01,,\n`;
  s += l;
  bytes += l.length;
  if (s.length > 1 << 20) {
    fs.writeSync(fd, s);
    s = '';
  }
}
fs.writeSync(fd, s);
fs.closeSync(fd);
global.gc?.();
const hwm = () => Number(/VmHWM:\s+(\d+)/.exec(fs.readFileSync('/proc/self/status', 'utf8'))?.[1] ?? 0) / 1024;
const rssBefore = process.memoryUsage().rss / 1048576;
const loop = monitorEventLoopDelay({ resolution: 10 });
loop.enable();
const t0 = performance.now();
let answer: string;
try {
  const r = await parseSectionsStream(fs.createReadStream(file, { highWaterMark: 64 * 1024 }), 'bench.csv', { fileBytes: 64 * 1024 * 1024, maxLineChars: 64 * 1024 });
  answer = `${r.rows.length} rows accepted`;
} catch (e) {
  answer = `refused: ${(e as Error).message}`;
}
const seconds = (performance.now() - t0) / 1000;
loop.disable();
console.log(`sections CSV ${(bytes / 1048576).toFixed(0)} MB streamed: answered in ${seconds.toFixed(2)} s (${answer})`);
console.log(`  RSS before ${rssBefore.toFixed(0)} MB, peak ${hwm().toFixed(0)} MB; longest event-loop stall ${(loop.max / 1e6).toFixed(0)} ms`);
fs.rmSync(file);
