// Load benchmark: the demo scaled up (50 institutes, 500 people, 10 000 campaigns, 2 000 benchmarks, 6 000
// sections), two HTTP processes behind Debian's haproxy on loopback, and autocannon (npm) at 50 and 200
// connections on the campaign list and a campaign detail, as a signed-in operator and as a coordinator.
// Loopback only, bounded in time (LOAD_SECONDS per cell, default 30). Figures only; nothing fails on time.
// haproxy checks the liveness path /api/live (LOAD_CHECK=/api/health repeats the earlier set-up, whose checks took
// saturated processes out); its statistics tell per cell which 503 answers came from haproxy itself.
import { spawn, type ChildProcess } from 'node:child_process';
import type { EventEmitter } from 'node:events';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import autocannon from 'autocannon';
// @ts-expect-error plain ESM helper shared with `npm start`
import { freePort, startCluster } from '../../scripts/lib/postgres.mjs';
import { openDatabase } from '../../server/db/data-source';
import { createSelfSignedCertificate } from '../../server/dev/self-signed';
import { issueToken } from '../../server/tokens/tokens.service';
import { seedDemo } from '../../seeds/demo';
import { scaleDemo } from '../../seeds/scale.seed';
import { startHaproxy } from '../helpers/haproxy';
import { startBenchTsa, stopBenchTsa } from './bench-tsa';
import { reportFigure } from './figures';

const SECONDS = Number(process.env.LOAD_SECONDS ?? 30);
const CHECK = process.env.LOAD_CHECK ?? '/api/live';
const tmp = fs.mkdtempSync(path.join(os.tmpdir(), 'chronolevel-load-bench-'));
process.env.PG_FSYNC ??= 'off';

async function startHttp(env: Record<string, string>): Promise<ChildProcess> {
  const child = spawn(process.execPath, ['--import', 'tsx', 'server/index.ts'], { env: { ...process.env, ...env }, stdio: ['ignore', 'pipe', 'pipe'] });
  let err = '';
  child.stderr!.on('data', (d: Buffer) => (err += d.toString()));
  await new Promise<void>((resolve, reject) => {
    const timer = setTimeout(() => reject(new Error(`HTTP process did not start: ${err.slice(-800)}`)), 60_000);
    const poll = async () => {
      try {
        const r = await fetch(`http://127.0.0.1:${env.PORT}/api/health`);
        if (r.ok) {
          clearTimeout(timer);
          return resolve();
        }
      } catch {
        // not listening yet
      }
      if (child.exitCode !== null) return reject(new Error(`HTTP process exited: ${err.slice(-800)}`));
      setTimeout(poll, 250);
    };
    void poll();
  });
  return child;
}

type Cell = { what: string; connections: number; rps: number; p50: number; p95: number; p975: number; p99: number; errors: number; non2xx: number; fromBalancer: number; checksDown: number; load: string };
type Lb = Awaited<ReturnType<typeof startHaproxy>>;

async function run(lb: Lb, url: string, token: string, connections: number, what: string): Promise<Cell> {
  const before = await lb.stats();
  // without a callback autocannon returns its tracker (an event emitter) made thenable
  const instance = autocannon({ url, connections, duration: SECONDS, headers: { authorization: `Bearer ${token}` }, timeout: 10 }) as unknown as EventEmitter & Promise<autocannon.Result>;
  // autocannon's summary has no 95th percentile (it reports 90 and 97.5): it is taken from every response's time
  const times: number[] = [];
  instance.on('response', (_client: unknown, _status: number, _bytes: number, ms: number) => times.push(ms));
  const r = await instance;
  times.sort((a, b) => a - b);
  const p95 = times.length ? times[Math.ceil(0.95 * times.length) - 1] : NaN;
  const after = await lb.stats();
  const down = (x: typeof after) => x.servers.reduce((a, sv) => a + sv.checksDown, 0);
  return {
    what, connections,
    rps: r.requests.average,
    p50: r.latency.p50, p95: Math.round(p95), p975: r.latency.p97_5, p99: r.latency.p99,
    errors: r.errors + r.timeouts, non2xx: r.non2xx,
    fromBalancer: after.noServerAvailable - before.noServerAvailable, checksDown: down(after) - down(before), load: os.loadavg()[0].toFixed(2),
  };
}

async function main() {
  const port = await freePort();
  const cluster = await startCluster({ dataDir: path.join(tmp, 'pg'), port, database: 'load', log: () => {} });
  const ds = await openDatabase(cluster.url);
  const t = performance.now();
  await startBenchTsa(tmp);
  await seedDemo(ds);
  const sizes = await scaleDemo(ds);
  console.log(`scaled demo in ${((performance.now() - t) / 1000).toFixed(1)} s: ${JSON.stringify(sizes)}`);
  const [{ id: opId, institute_id: opInst }] = await ds.query("SELECT id, institute_id FROM app_user WHERE email = 'person1@scaled-copy.invalid'");
  const [{ id: coordId }] = await ds.query("SELECT id FROM app_user WHERE role = 'coordinator' ORDER BY email LIMIT 1");
  const opToken = (await issueToken(ds, opId, 'load bench', null)).secret;
  const coordToken = (await issueToken(ds, coordId, 'load bench', null)).secret;
  const [{ id: campaignId }] = await ds.query('SELECT id FROM campaign WHERE institute_id = $1 ORDER BY name LIMIT 1', [opInst]);
  await ds.destroy();

  const cert = createSelfSignedCertificate({ commonName: 'bench', organization: 'bench' });
  const certFile = path.join(tmp, 'idp-cert.pem');
  fs.writeFileSync(certFile, cert.certPem);
  const ports = [await freePort(), await freePort()];
  const lbPort = await freePort();
  const common = {
    DATABASE_URL: cluster.url, SESSION_SECRET: 'bench-session-secret-0123456789', IDP_CERT_FILE: certFile,
    SECRETS_DIR: path.join(tmp, 'secrets'), LOG_LEVEL: 'warn', NODE_ENV: 'production', CHRONOLEVEL_DEV_SERVICES: '0', CHRONOLEVEL_SEED: '0',
    PUBLIC_URL: `http://127.0.0.1:${lbPort}`, TRUST_PROXY: '1',
  };
  const children: ChildProcess[] = [];
  let lb: Lb | null = null;
  try {
    for (const p of ports) children.push(await startHttp({ ...common, PORT: String(p) }));
    lb = await startHaproxy({ port: lbPort, backends: ports, checkPath: CHECK, statsPort: await freePort() });
    const base = `http://127.0.0.1:${lbPort}`;
    const list = `${base}/api/v1/campaigns?page=1&pageSize=25&sort=updatedAt&order=desc`;
    const detail = `${base}/api/v1/campaigns/${campaignId}`;
    for (const u of [list, detail]) {
      const r = await fetch(u, { headers: { authorization: `Bearer ${opToken}` } });
      if (!r.ok) throw new Error(`${u} answered ${r.status}: ${(await r.text()).slice(0, 300)}`);
    }
    const cells: Cell[] = [];
    for (const connections of [50, 200]) {
      cells.push(await run(lb, list, coordToken, connections, 'campaign list (coordinator, all 10 000)'));
      cells.push(await run(lb, list, opToken, connections, 'campaign list (operator, own institute)'));
      cells.push(await run(lb, detail, opToken, connections, 'campaign detail (operator)'));
    }
    console.log(`\nthrough haproxy (health check ${CHECK}) with 2 HTTP processes, ${SECONDS} s per cell, ${os.cpus().length} cores (target: 0 errors, p95 < 200 ms at 200 connections)`);
    console.log('| what | connections | req/s | p50 ms | p95 ms | p97.5 ms | p99 ms | errors | non-2xx | of which 503 from haproxy | servers marked down | load avg |');
    console.log('| --- | --- | --- | --- | --- | --- | --- | --- | --- | --- | --- | --- |');
    for (const c of cells) console.log(`| ${c.what} | ${c.connections} | ${c.rps.toFixed(0)} | ${c.p50} | ${c.p95} | ${c.p975} | ${c.p99} | ${c.errors} | ${c.non2xx} | ${c.fromBalancer} | ${c.checksDown} | ${c.load} |`);
    for (const c of cells) {
      const at200 = c.connections === 200;
      reportFigure({
        figure: `load: ${c.what}, ${c.connections} conn., ${SECONDS} s, check ${CHECK} (req/s; p95; errors + non-2xx)`,
        measured: `${c.rps.toFixed(0)} req/s; p95 ${c.p95} ms (p97.5 ${c.p975}); ${c.errors} + ${c.non2xx} (${c.fromBalancer} from haproxy)`,
        target: at200 ? 'p95 < 200 ms, 0 errors' : '0 errors',
        met: at200 ? c.p95 < 200 && c.errors + c.non2xx === 0 : c.errors + c.non2xx === 0,
        load: Number(c.load),
      });
    }
  } finally {
    await lb?.stop();
    for (const c of children) c.kill('SIGTERM');
    await new Promise((r) => setTimeout(r, 2000));
    await stopBenchTsa();
    cluster.stop();
    fs.rmSync(tmp, { recursive: true, force: true });
  }
}

await main();
