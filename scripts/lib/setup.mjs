// Shared by `npm start`, `npm test` and `npm run bench`: make sure npm dependencies are installed.
import { spawnSync } from 'node:child_process';
import fs from 'node:fs';

/**
 * A lock file newer than the installation (a fresh checkout touches it) only calls for `npm ci` when the installed
 * packages differ from it: every package of the lock file installed at its version (optional ones, such as other
 * platforms' binaries, may be absent), as npm's own record of the installation lists them.
 */
function installedMatchesLock(marker) {
  try {
    const lock = JSON.parse(fs.readFileSync('package-lock.json', 'utf8')).packages ?? {};
    const installed = JSON.parse(fs.readFileSync(marker, 'utf8')).packages ?? {};
    for (const [key, entry] of Object.entries(lock)) {
      if (key === '') continue;
      const have = Object.hasOwn(installed, key) ? installed[key] : undefined;
      if (!have) {
        if (entry.optional) continue;
        return false;
      }
      if (have.version !== entry.version) return false;
    }
    return true;
  } catch {
    return false;
  }
}

export function ensureNodeModules(log = console.log) {
  const marker = 'node_modules/.package-lock.json';
  const stale = !fs.existsSync(marker) || (fs.statSync('package-lock.json').mtimeMs > fs.statSync(marker).mtimeMs + 1000 && !installedMatchesLock(marker));
  if (!stale) return;
  log('Installing npm dependencies (npm ci)…');
  const r = spawnSync('npm', ['ci', '--no-audit', '--no-fund'], { stdio: 'inherit' });
  if (r.status !== 0) throw new Error('npm ci failed');
}
