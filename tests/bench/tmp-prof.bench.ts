import { spawn, execSync } from 'node:child_process';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import autocannon from 'autocannon';
// @ts-expect-error plain ESM
import { freePort, startCluster } from '../../scripts/lib/postgres.mjs';
import { openDatabase } from '../../server/db/data-source';
import { issueToken } from '../../server/tokens/tokens.service';
import { seedDemo } from '../../seeds/demo';
import { scaleDemo } from '../../seeds/scale.seed';
import { startBenchTsa } from './bench-tsa';
import { createSelfSignedCertificate } from '../../server/dev/self-signed';
process.env.PG_FSYNC ??= 'off';
const tmp = fs.mkdtempSync(path.join(os.tmpdir(), 'prof-'));
function cpuOf(pattern: string) {
  const out = execSync(`ps -eo pid,comm,args`).toString().split('\n');
  let tot = 0;
  for (const line of out) {
    if (!line.includes(pattern)) continue;
    const pid = line.trim().split(/\s+/)[0];
    try { const s = fs.readFileSync(`/proc/${pid}/stat`, 'utf8').split(') ')[1].split(' '); tot += Number(s[11]) + Number(s[12]); } catch {}
  }
  return tot / 100;
}
async function main() {
  const port = await freePort();
  const cluster = await startCluster({ dataDir: path.join(tmp, 'pg'), port, database: 'load', log: () => {} });
  const ds = await openDatabase(cluster.url);
  await startBenchTsa(tmp);
  await seedDemo(ds);
  await scaleDemo(ds);
  const [{ id: opId }] = await ds.query("SELECT id FROM app_user WHERE email = 'person1@scaled-copy.invalid'");
  const [{ id: coordId }] = await ds.query("SELECT id FROM app_user WHERE role = 'coordinator' ORDER BY email LIMIT 1");
  const opToken = (await issueToken(ds, opId, 'b', null)).secret;
  const coordToken = (await issueToken(ds, coordId, 'b', null)).secret;
  const [{ id: campId }] = await ds.query("SELECT c.id FROM campaign c JOIN app_user u ON u.institute_id = c.institute_id WHERE u.id = $1 LIMIT 1", [opId]);
  const httpPort = await freePort();
  const cert = createSelfSignedCertificate({ commonName: 'bench', organization: 'bench' });
  const certFile = path.join(tmp, 'idp-cert.pem');
  fs.writeFileSync(certFile, cert.certPem);
  const args = process.env.PROF ? ['--cpu-prof', `--cpu-prof-dir=/work/tmp/prof`] : [];
  const child = spawn(process.execPath, [...args, '--import', 'tsx', 'server/index.ts'], { env: { ...process.env, PORT: String(httpPort), DATABASE_URL: cluster.url, SESSION_SECRET: 'bench-session-secret-0123456789', IDP_CERT_FILE: certFile,
    SECRETS_DIR: path.join(tmp, 'secrets'), LOG_LEVEL: 'warn', NODE_ENV: 'production', CHRONOLEVEL_DEV_SERVICES: '0', CHRONOLEVEL_SEED: '0', PUBLIC_URL: `http://127.0.0.1:${httpPort}` }, stdio: ['ignore', 'inherit', 'inherit'] });
  for (;;) { try { if ((await fetch(`http://127.0.0.1:${httpPort}/api/health`)).ok) break; } catch {} await new Promise((r) => setTimeout(r, 250)); }
  const cells: [string, string, string][] = [
    ['list coord', `/api/v1/campaigns`, coordToken], ['list op', `/api/v1/campaigns`, opToken], ['detail', `/api/v1/campaigns/${campId}`, opToken], ['me', '/api/v1/me', opToken]];
  for (const [what, p, tok] of cells) {
    if (process.env.ONLY && !what.startsWith(process.env.ONLY)) continue;
    const n0 = cpuOf(`--import tsx server/index.ts`), p0 = cpuOf('postgres:');
    const r = await autocannon({ url: `http://127.0.0.1:${httpPort}${p}`, connections: 50, duration: Number(process.env.SECS ?? 8), headers: { authorization: `Bearer ${tok}` } });
    const n1 = cpuOf(`--import tsx server/index.ts`), p1 = cpuOf('postgres:');
    const n = r.requests.total;
    console.log(`${what}: ${r.requests.average} req/s p50 ${r.latency.p50} non2xx ${r.non2xx} node ${(1e6 * (n1 - n0) / n).toFixed(0)} µs/req pg ${(1e6 * (p1 - p0) / n).toFixed(0)} µs/req bytes ${(r.throughput.total / n).toFixed(0)}`);
  }
  child.kill('SIGTERM');
  await new Promise((r) => child.on('exit', r));
  await ds.destroy(); cluster.stop();
  process.exit(0);
}
void main();
