// Ingest benchmark: a 1,000,000-row ratio CSV uploaded through HTTP to the app running in its own process against
// a private PostgreSQL; prints rows/s, total seconds, the server's peak RSS and the time to serve decimated plot data.
// Targets (from the issue): ingest < 5 s, peak RSS < 300 MB, plot data < 200 ms. Figures only; nothing fails on time.
import { spawn } from 'node:child_process';
import crypto from 'node:crypto';
import fs from 'node:fs';
import http from 'node:http';
import os from 'node:os';
import path from 'node:path';
// @ts-expect-error plain ESM helper shared with `npm start`
import { freePort, startCluster } from '../../scripts/lib/postgres.mjs';
import { openDatabase } from '../../server/db/data-source';
import { createSelfSignedCertificate } from '../../server/dev/self-signed';
import { issueToken } from '../../server/tokens/tokens.service';
import { seedDemo } from '../../seeds/demo';
import { insertUploadCampaign } from '../helpers/uploads-campaign';
import { startBenchTsa, stopBenchTsa } from './bench-tsa';

const ROWS = Number(process.env.INGEST_ROWS ?? 1_000_000);
const tmp = fs.mkdtempSync(path.join(os.tmpdir(), 'chronolevel-ingest-bench-'));
process.env.PG_FSYNC ??= 'off';

function makeCsv(file: string) {
  const fd = fs.openSync(file, 'w');
  let s = '# invented benchmark series: 1 s spacing, white frequency noise\nmjd,ratio,flag\n';
  let seed = 12345;
  const rnd = () => (seed = (seed * 16807) % 2147483647) / 2147483647;
  for (let i = 0; i < ROWS; i++) {
    // white frequency noise σ_y = 3e-16 at 1 s (Box–Muller), written as a 21-digit ratio in units of 1e-20
    const g = Math.sqrt(-2 * Math.log(rnd())) * Math.cos(2 * Math.PI * rnd());
    const units = BigInt(Math.round(g * 30_000));
    const ratio = units >= 0n ? `1.${units.toString().padStart(20, '0')}` : `0.${(10n ** 20n + units).toString()}`;
    s += `${(61100 + i / 86400).toFixed(9)},${ratio},${i % 997 === 0 ? 0 : 1}\n`;
    if (s.length > 1 << 20) {
      fs.writeSync(fd, s);
      s = '';
    }
  }
  fs.writeSync(fd, s);
  fs.closeSync(fd);
}

function peakRssMb(pid: number): number {
  const status = fs.readFileSync(`/proc/${pid}/status`, 'utf8');
  return Number(/VmHWM:\s+(\d+)/.exec(status)?.[1] ?? 0) / 1024;
}

async function main() {
  const csvFile = path.join(tmp, 'series.csv');
  let t = performance.now();
  makeCsv(csvFile);
  const size = fs.statSync(csvFile).size;
  console.log(`generated ${ROWS} rows, ${(size / 1e6).toFixed(1)} MB in ${((performance.now() - t) / 1000).toFixed(2)} s`);

  const port = await freePort();
  const cluster = await startCluster({ dataDir: path.join(tmp, 'pg'), port, database: 'bench', log: () => {} });
  const ds = await openDatabase(cluster.url);
  await startBenchTsa(tmp);
  await seedDemo(ds);
  const campaignId = await insertUploadCampaign(ds);
  const [{ id: userId }] = await ds.query("SELECT id FROM app_user WHERE email = 'ines.varga@saltmarsh-lab.invalid'");
  const token = (await issueToken(ds, userId, 'bench', null)).secret;
  const cert = createSelfSignedCertificate({ commonName: 'bench', organization: 'bench' });
  const certFile = path.join(tmp, 'idp-cert.pem');
  fs.writeFileSync(certFile, cert.certPem);

  const child = spawn(process.execPath, [...(process.env.CHILD_NODE_ARGS ?? '').split(' ').filter(Boolean), '--import', 'tsx', 'tests/helpers/upload-server.ts'], {
    env: { ...process.env, CHRONOLEVEL_CHILD_ENV: JSON.stringify({ DATABASE_URL: cluster.url, SESSION_SECRET: 'bench-session-secret-0123456789', IDP_CERT_FILE: certFile, SECRETS_DIR: path.join(tmp, 'secrets'), LOG_LEVEL: 'silent', NODE_ENV: 'production', UPLOAD_LIMIT_BYTES: String(1 << 30) }) },
    stdio: ['ignore', 'pipe', 'inherit'],
  });
  const appPort: number = await new Promise((resolve) => child.stdout!.on('data', (d: Buffer) => {
    const m = /LISTENING (\d+)/.exec(d.toString());
    if (m) resolve(Number(m[1]));
  }));
  const baseRss = peakRssMb(child.pid!);

  try {
    const boundary = `----bench${crypto.randomUUID()}`;
    const fields = { epochColumn: '1', epochKind: 'mjd', valueColumn: '2', valueKind: 'ratio', flagColumn: '3' };
    const head = Object.entries(fields).map(([k, v]) => `--${boundary}\r\nContent-Disposition: form-data; name="${k}"\r\n\r\n${v}\r\n`).join('')
      + `--${boundary}\r\nContent-Disposition: form-data; name="file"; filename="series.csv"\r\nContent-Type: text/csv\r\n\r\n`;
    const tail = `\r\n--${boundary}--\r\n`;
    t = performance.now();
    const answer: { status: number; body: string } = await new Promise((resolve, reject) => {
      const req = http.request({
        host: '127.0.0.1', port: appPort, method: 'POST', path: `/api/v1/campaigns/${campaignId}/uploads`,
        headers: { authorization: `Bearer ${token}`, 'content-type': `multipart/form-data; boundary=${boundary}`, 'content-length': Buffer.byteLength(head) + size + Buffer.byteLength(tail) },
      }, (res) => {
        let body = '';
        res.on('data', (c) => (body += c));
        res.on('end', () => resolve({ status: res.statusCode ?? 0, body }));
      });
      req.on('error', reject);
      req.write(head);
      const rs = fs.createReadStream(csvFile, { highWaterMark: 1 << 20 });
      rs.on('end', () => req.end(tail));
      rs.pipe(req, { end: false });
    });
    const seconds = (performance.now() - t) / 1000;
    if (answer.status !== 201) throw new Error(`upload answered ${answer.status}: ${answer.body.slice(0, 400)}`);
    const series = JSON.parse(answer.body) as { id: string; rowCount: number };
    console.log(`upload of ${series.rowCount} rows: ${seconds.toFixed(2)} s total, ${Math.round(series.rowCount / seconds).toLocaleString('en')} rows/s (target < 5 s)`);
    console.log(`server peak RSS: ${peakRssMb(child.pid!).toFixed(0)} MB (after start ${baseRss.toFixed(0)} MB; target < 300 MB)`);

    const times: number[] = [];
    for (let i = 0; i < 6; i++) {
      const t0 = performance.now();
      const res = await fetch(`http://127.0.0.1:${appPort}/api/v1/uploads/${series.id}/series?points=2000`, { headers: { authorization: `Bearer ${token}` } });
      const body = (await res.json()) as { buckets: unknown[] };
      times.push(performance.now() - t0);
      if (body.buckets.length !== 2000) throw new Error('unexpected plot answer');
    }
    times.sort((a, b) => a - b);
    console.log(`plot data (2000 buckets over ${series.rowCount} samples): first ${times[times.length - 1].toFixed(0)} ms, median ${times[3].toFixed(0)} ms (target < 200 ms)`);
  } finally {
    child.kill(process.env.CHILD_STOP === 'TERM' ? 'SIGTERM' : 'SIGKILL');
    await new Promise((r) => setTimeout(r, 1500));
    await ds.destroy();
    await stopBenchTsa();
    cluster.stop();
    fs.rmSync(tmp, { recursive: true, force: true });
  }
}

await main();
