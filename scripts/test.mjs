// `npm test`: installs what is missing (npm packages, Debian's PostgreSQL server and Chromium for the browser
// tests), then runs every Vitest project (unit, api, e2e). The API and browser tests start their own PostgreSQL
// in a temporary folder (tests/setup/global-services.ts). Extra arguments go to vitest.
import { spawnSync } from 'node:child_process';
import fs from 'node:fs';
import path from 'node:path';
import { ensureNodeModules } from './lib/setup.mjs';

process.chdir(path.dirname(path.dirname(new URL(import.meta.url).pathname)));
const say = (m) => console.log(`[chronolevel test] ${m}`);
ensureNodeModules(say);
const { ensurePostgresBinaries } = await import('./lib/postgres.mjs');
ensurePostgresBinaries(say);

const isRoot = process.getuid?.() === 0;
const needs = [
  ['/usr/bin/chromium', 'chromium'],
  ['/usr/bin/pdfsig', 'poppler-utils'],
  // Certificate tests: NSS certutil gives pdfsig the institute root; openssl checks time-stamps, CMS and CRLs.
  ['/usr/bin/certutil', 'libnss3-tools'],
  ['/usr/bin/openssl', 'openssl'],
  // The two-process topology test runs two HTTP processes behind Debian's haproxy.
  ['/usr/sbin/haproxy', 'haproxy'],
].filter(([bin]) => !fs.existsSync(bin));
if (needs.length && isRoot) {
  const pkgs = needs.map(([, p]) => p);
  say(`Installing ${pkgs.join(', ')} from Debian packages…`);
  const env = { ...process.env, DEBIAN_FRONTEND: 'noninteractive' };
  spawnSync('apt-get', ['update', '-q'], { stdio: 'inherit', env });
  spawnSync('apt-get', ['install', '-y', '-q', ...pkgs], { stdio: 'inherit', env });
}
for (const [bin, pkg] of needs) {
  if (!fs.existsSync(bin)) say(`warning: ${bin} is missing (Debian package ${pkg}); tests that need it will fail.`);
}

// The browser tests drive the built client.
const r0 = spawnSync('npx', ['vite', 'build', '--logLevel', 'warn'], { stdio: 'inherit' });
if (r0.status !== 0) process.exit(r0.status ?? 1);

fs.mkdirSync('test-results', { recursive: true });
const args = ['vitest', 'run', '--reporter=default', '--reporter=json', '--outputFile.json=test-results/vitest.json', ...process.argv.slice(2)];
const r = spawnSync('npx', args, { stdio: 'inherit' });
process.exit(r.status ?? 1);
