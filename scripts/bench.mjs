// `npm run bench`: runs every benchmark in tests/bench/ one after another and prints their figures.
// Benchmarks report; they never pass or fail on time. Name one to run only it: npm run bench -- ingest
import { spawnSync } from 'node:child_process';
import fs from 'node:fs';
import path from 'node:path';
import { ensureNodeModules } from './lib/setup.mjs';

process.chdir(path.dirname(path.dirname(new URL(import.meta.url).pathname)));
ensureNodeModules();
const only = process.argv.slice(2);
const files = fs.readdirSync('tests/bench').filter((f) => f.endsWith('.bench.ts')).filter((f) => !only.length || only.some((o) => f.includes(o))).sort();
let failed = 0;
for (const f of files) {
  console.log(`\n=== ${f} ===`);
  const r = spawnSync(process.execPath, ['--import', 'tsx', '--expose-gc', path.join('tests/bench', f)], { stdio: 'inherit' });
  if (r.status !== 0) failed++;
}
process.exit(failed ? 1 : 0);
