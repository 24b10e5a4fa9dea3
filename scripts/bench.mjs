// `npm run bench`: runs every benchmark in tests/bench/ one after another, shows their output, and ends with one
// table of the headline figures (figure, measured, target, met?) with the machine and its load average.
// Benchmarks report; they never pass or fail on time. Name one to run only it: npm run bench -- ingest
import { execFileSync, spawn } from 'node:child_process';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { ensureNodeModules } from './lib/setup.mjs';

process.chdir(path.dirname(path.dirname(new URL(import.meta.url).pathname)));
ensureNodeModules();
const only = process.argv.slice(2);
const files = fs.readdirSync('tests/bench').filter((f) => f.endsWith('.bench.ts')).filter((f) => !only.length || only.some((o) => f.includes(o))).sort();

const uptime = () => {
  try {
    return execFileSync('uptime', { encoding: 'utf8' }).trim();
  } catch {
    return `load average: ${os.loadavg().map((l) => l.toFixed(2)).join(', ')}`;
  }
};

/** Runs one benchmark, echoing its output; resolves with its exit code and the figures it reported. */
function runBench(file) {
  return new Promise((resolve) => {
    const figures = [];
    const child = spawn(process.execPath, ['--import', 'tsx', '--expose-gc', path.join('tests/bench', file)], { stdio: ['ignore', 'pipe', 'inherit'] });
    let rest = '';
    child.stdout.on('data', (d) => {
      const lines = (rest + d.toString()).split('\n');
      rest = lines.pop();
      for (const l of lines) {
        if (l.startsWith('::figure:: ')) {
          try {
            figures.push(JSON.parse(l.slice(11)));
            continue;
          } catch {
            // not a figure line after all: print it
          }
        }
        process.stdout.write(`${l}\n`);
      }
    });
    child.on('close', (code) => {
      if (rest) process.stdout.write(rest);
      resolve({ code, figures });
    });
  });
}

const started = uptime();
const rows = [];
let failed = 0;
for (const f of files) {
  console.log(`\n=== ${f} ===`);
  const { code, figures } = await runBench(f);
  if (code !== 0) {
    failed++;
    rows.push({ bench: f, figure: `(${f} ended with exit code ${code}; figures above may be missing)`, measured: '—', target: '—', met: null, load: os.loadavg()[0] });
  }
  for (const x of figures) rows.push({ bench: f, ...x });
}

const mem = (os.totalmem() / 2 ** 30).toFixed(0);
console.log(`\n## Benchmark figures — ${new Date().toISOString()}, ${os.cpus().length} cores (${os.cpus()[0]?.model ?? 'unknown CPU'}), ${mem} GiB, Node.js ${process.version}`);
console.log(`uptime at start: ${started}`);
console.log(`uptime at end:   ${uptime()}`);
console.log('(load average above the core count means other work shared the machine; the figures are then pessimistic)\n');
console.log('| benchmark | figure | measured | target | met? | load avg (1 min) |');
console.log('| --- | --- | --- | --- | --- | --- |');
const esc = (s) => String(s).replaceAll('|', '\\|');
for (const r of rows) {
  const met = r.met === true ? 'yes' : r.met === false ? '**no**' : '—';
  console.log(`| ${r.bench.replace('.bench.ts', '')} | ${esc(r.figure)} | ${esc(r.measured)} | ${esc(r.target)} | ${met} | ${Number(r.load).toFixed(2)} |`);
}
if (rows.length === 0) console.log('| — | no benchmark reported a headline figure | — | — | — | — |');
process.exit(failed ? 1 : 0);
