// Shared by `npm start`, `npm test` and `npm run bench`: make sure npm dependencies are installed.
import { spawnSync } from 'node:child_process';
import fs from 'node:fs';

export function ensureNodeModules(log = console.log) {
  const marker = 'node_modules/.package-lock.json';
  const stale = !fs.existsSync(marker) || fs.statSync('package-lock.json').mtimeMs > fs.statSync(marker).mtimeMs + 1000;
  if (!stale) return;
  log('Installing npm dependencies (npm ci)…');
  const r = spawnSync('npm', ['ci', '--no-audit', '--no-fund'], { stdio: 'inherit' });
  if (r.status !== 0) throw new Error('npm ci failed');
}
