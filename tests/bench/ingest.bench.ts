// Ingest benchmark, against a private PostgreSQL with fsync on:
//  1. side by side, the same 1,000,000 rows uploaded through the app's HTTP upload path (app in its own process) and
//     loaded with `psql \copy` into a plain table on the same cluster, two alternating rounds; the ratio of the best
//     times (target ≤ 1.5×);
//  2. a 10,000,000-row upload (≈ 420 MB; BIG_ROWS to change, 0 to skip) end to end with the server's peak RSS
//     (targets < 30 s, < 400 MB), its result computed by a job worker in its own process (target < 10 s), and the
//     decimated plot data (target < 200 ms).
// INGEST_ROWS changes the side-by-side size. Figures only; nothing fails on time.
import { spawn, spawnSync, type ChildProcess } from 'node:child_process';
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
import { peakRssMb, reportFigure } from './figures';

const ROWS = Number(process.env.INGEST_ROWS ?? 1_000_000);
const BIG_ROWS = Number(process.env.BIG_ROWS ?? 10_000_000);
const tmp = fs.mkdtempSync(path.join(os.tmpdir(), 'chronolevel-ingest-bench-'));
// the comparison with psql \copy is made with fsync on (durable commits on both sides)
process.env.PG_FSYNC = 'on';
const load = () => os.loadavg()[0].toFixed(2);

/** The CSV a lab would upload (a comment line, a header, ROWS rows); `plain` leaves out the comment for psql. */
function makeCsv(file: string, ROWS: number, plain = false) {
  const fd = fs.openSync(file, 'w');
  let s = `${plain ? '' : '# invented benchmark series: 1 s spacing, white frequency noise\n'}mjd,ratio,flag\n`;
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

type Child = { child: ChildProcess; port: number };

/** CPU seconds (user + system) a process has used so far, from /proc (Linux); NaN elsewhere. */
function cpuSeconds(pid: number): number {
  try {
    const fields = fs.readFileSync(`/proc/${pid}/stat`, 'utf8').replace(/^.*\) /, '').split(' ');
    // after the command name: state is field 3 of proc(5), utime and stime fields 14 and 15, in clock ticks (100 per second on Linux)
    return (Number(fields[11]) + Number(fields[12])) / 100;
  } catch {
    return NaN;
  }
}

function startServer(env: Record<string, string>): Promise<Child> {
  const child = spawn(process.execPath, [...(process.env.CHILD_NODE_ARGS ?? '').split(' ').filter(Boolean), '--import', 'tsx', 'tests/helpers/upload-server.ts'], {
    env: { ...process.env, CHRONOLEVEL_CHILD_ENV: JSON.stringify(env) },
    stdio: ['ignore', 'pipe', 'inherit'],
  });
  return new Promise((resolve) => child.stdout!.on('data', (d: Buffer) => {
    const m = /LISTENING (\d+)/.exec(d.toString());
    if (m) resolve({ child, port: Number(m[1]) });
  }));
}

async function upload(port: number, token: string, campaignId: string, csvFile: string): Promise<{ seconds: number; id: string; rowCount: number }> {
  const size = fs.statSync(csvFile).size;
  const boundary = `----bench${crypto.randomUUID()}`;
  const fields = { epochColumn: '1', epochKind: 'mjd', valueColumn: '2', valueKind: 'ratio', flagColumn: '3' };
  const head = Object.entries(fields).map(([k, v]) => `--${boundary}\r\nContent-Disposition: form-data; name="${k}"\r\n\r\n${v}\r\n`).join('')
    + `--${boundary}\r\nContent-Disposition: form-data; name="file"; filename="series.csv"\r\nContent-Type: text/csv\r\n\r\n`;
  const tail = `\r\n--${boundary}--\r\n`;
  const t = performance.now();
  const answer: { status: number; body: string } = await new Promise((resolve, reject) => {
    const req = http.request({
      host: '127.0.0.1', port, method: 'POST', path: `/api/v1/campaigns/${campaignId}/uploads`,
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
  return { seconds, ...series };
}

/** `psql \copy` of the same rows into a fresh plain table (no index, no constraint); seconds including psql's start. */
function psqlCopy(url: string, plainFile: string, table: string): number {
  const create = spawnSync('psql', [url, '-q', '-v', 'ON_ERROR_STOP=1', '-c', `DROP TABLE IF EXISTS ${table}; CREATE TABLE ${table} (mjd float8, ratio numeric, flag smallint)`], { encoding: 'utf8' });
  if (create.status !== 0) throw new Error(create.stderr);
  const t = performance.now();
  const r = spawnSync('psql', [url, '-q', '-v', 'ON_ERROR_STOP=1', '-c', `\\copy ${table} FROM '${plainFile}' WITH (FORMAT csv, HEADER true)`], { encoding: 'utf8' });
  const seconds = (performance.now() - t) / 1000;
  if (r.status !== 0) throw new Error(r.stderr);
  return seconds;
}

async function plotTimes(port: number, token: string, seriesId: string): Promise<{ first: number; median: number }> {
  const times: number[] = [];
  for (let i = 0; i < 7; i++) {
    const t0 = performance.now();
    const res = await fetch(`http://127.0.0.1:${port}/api/v1/uploads/${seriesId}/series?points=2000`, { headers: { authorization: `Bearer ${token}` } });
    const body = (await res.json()) as { buckets: unknown[] };
    times.push(performance.now() - t0);
    if (body.buckets.length !== 2000) throw new Error('unexpected plot answer');
  }
  const first = times[0];
  times.sort((a, b) => a - b);
  return { first, median: times[3] };
}

/**
 * Waits for the worker to finish the campaign's queued result; the worker's own start-to-finish time in seconds, and
 * the stages it went through with their durations (from the database times of its job_progress writes, polled often
 * enough to see every stage that lasts longer than the poll interval).
 */
async function resultSeconds(ds: Awaited<ReturnType<typeof openDatabase>>, campaignId: string, timeoutMs: number, pollMs = 200): Promise<{ seconds: number; stages: string }> {
  const end = Date.now() + timeoutMs;
  const seen: { stage: string; at: number }[] = [];
  for (;;) {
    const [r]: { state: string; s: number | null; error: string | null; started: number | null; finished: number | null }[] = await ds.query(
      'SELECT state, extract(epoch FROM finished_at - started_at)::float8 AS s, error, extract(epoch FROM started_at)::float8 AS started, extract(epoch FROM finished_at)::float8 AS finished FROM result_request WHERE campaign_id = $1', [campaignId]);
    const [p]: { stage: string; at: number }[] = await ds.query(
      "SELECT stage, extract(epoch FROM updated_at)::float8 AS at FROM job_progress WHERE kind = 'result-compute' AND subject_id = $1", [campaignId]);
    if (p && !seen.some((q) => q.stage === p.stage && q.at === p.at)) seen.push(p);
    if (r?.state === 'done') {
      const marks = [{ stage: 'started', at: r.started ?? NaN }, ...seen.filter((q) => q.at >= (r.started ?? 0) && q.at < (r.finished ?? Infinity)), { stage: 'done', at: r.finished ?? NaN }];
      const stages = marks.slice(0, -1).map((q, i) => `${q.stage} ${(marks[i + 1].at - q.at).toFixed(2)} s`).join(', ');
      return { seconds: r.s ?? NaN, stages };
    }
    if (r?.state === 'failed') throw new Error(`result computation failed: ${r.error}`);
    if (Date.now() > end) throw new Error(`no result within ${timeoutMs / 1000} s (state ${r?.state})`);
    await new Promise((res) => setTimeout(res, pollMs));
  }
}

async function main() {
  const csvFile = path.join(tmp, 'series.csv');
  const plainFile = path.join(tmp, 'series-plain.csv');
  let t = performance.now();
  makeCsv(csvFile, ROWS);
  makeCsv(plainFile, ROWS, true);
  console.log(`generated ${ROWS} rows, ${(fs.statSync(csvFile).size / 1e6).toFixed(1)} MB in ${((performance.now() - t) / 1000).toFixed(2)} s`);

  const port = await freePort();
  const cluster = await startCluster({ dataDir: path.join(tmp, 'pg'), port, database: 'bench', log: () => {} });
  const ds = await openDatabase(cluster.url);
  const [{ fsync }] = await ds.query('SHOW fsync');
  await startBenchTsa(tmp);
  await seedDemo(ds);
  const [{ id: userId }] = await ds.query("SELECT id FROM app_user WHERE email = 'ines.varga@saltmarsh-lab.invalid'");
  const token = (await issueToken(ds, userId, 'bench', null)).secret;
  const cert = createSelfSignedCertificate({ commonName: 'bench', organization: 'bench' });
  const certFile = path.join(tmp, 'idp-cert.pem');
  fs.writeFileSync(certFile, cert.certPem);
  const env = { DATABASE_URL: cluster.url, SESSION_SECRET: 'bench-session-secret-0123456789', IDP_CERT_FILE: certFile, SECRETS_DIR: path.join(tmp, 'secrets'), LOG_LEVEL: 'silent', NODE_ENV: 'production', UPLOAD_LIMIT_BYTES: String(1 << 30), CHRONOLEVEL_DEV_SERVICES: '0', CHRONOLEVEL_SEED: '0' };
  const server = await startServer(env);
  const baseRss = peakRssMb(server.child.pid!);
  let worker: ChildProcess | null = null;

  try {
    // 1. side by side, fsync on
    console.log(`\nside by side, ${ROWS} rows, fsync=${fsync}:`);
    const copies: number[] = [];
    const uploads: number[] = [];
    const sideCampaigns: string[] = [];
    let lastSeries = '';
    for (let round = 1; round <= 2; round++) {
      const c = psqlCopy(cluster.url, plainFile, `copy_plain_${round}`);
      copies.push(c);
      const campaignId = await insertUploadCampaign(ds);
      sideCampaigns.push(campaignId);
      const u = await upload(server.port, token, campaignId, csvFile);
      uploads.push(u.seconds);
      lastSeries = u.id;
      console.log(`  round ${round}: psql \\copy ${c.toFixed(2)} s, upload ${u.seconds.toFixed(2)} s (${Math.round(u.rowCount / u.seconds).toLocaleString('en')} rows/s), ratio ${(u.seconds / c).toFixed(2)}×, load ${load()}`);
    }
    const bestCopy = Math.min(...copies);
    const bestUpload = Math.min(...uploads);
    const ratio = bestUpload / bestCopy;
    reportFigure({ figure: `psql \\copy of ${ROWS.toLocaleString('en')} rows into a plain table (fsync ${fsync}), best of 2`, measured: `${bestCopy.toFixed(2)} s`, target: '—', met: null });
    reportFigure({ figure: `upload of the same rows through HTTP (busboy → COPY), best of 2`, measured: `${bestUpload.toFixed(2)} s`, target: '—', met: null });
    reportFigure({ figure: 'ingest ratio upload / psql \\copy', measured: `${ratio.toFixed(2)}×`, target: '≤ 1.5×', met: ratio <= 1.5 });
    const rss1 = peakRssMb(server.child.pid!);
    console.log(`  server peak RSS ${rss1.toFixed(0)} MB (after start ${baseRss.toFixed(0)} MB)`);
    const plot1 = await plotTimes(server.port, token, lastSeries);
    console.log(`  plot data (2000 buckets over ${ROWS} samples): first ${plot1.first.toFixed(0)} ms, median ${plot1.median.toFixed(0)} ms`);

    // the job worker in its own process computes the queued results (the HTTP process never does)
    worker = spawn(process.execPath, [...(process.env.WORKER_NODE_ARGS ?? '').split(' ').filter(Boolean), '--import', 'tsx', 'server/jobs/worker.ts'], { env: { ...process.env, ...env, LOG_LEVEL: 'error' }, stdio: ['ignore', 'inherit', 'inherit'] });
    for (const c of sideCampaigns) {
      const { seconds: s, stages } = await resultSeconds(ds, c, 300_000);
      console.log(`  result of a ${ROWS}-sample campaign in the worker: ${s.toFixed(2)} s (${stages})`);
    }
    const workerBase = peakRssMb(worker.pid!);

    // 2. ten million rows end to end
    if (BIG_ROWS > 0) {
      const bigFile = path.join(tmp, 'big.csv');
      fs.rmSync(plainFile);
      t = performance.now();
      makeCsv(bigFile, BIG_ROWS);
      const bigMb = fs.statSync(bigFile).size / 1e6;
      console.log(`\ngenerated ${BIG_ROWS} rows, ${bigMb.toFixed(0)} MB in ${((performance.now() - t) / 1000).toFixed(1)} s`);
      const campaignId = await insertUploadCampaign(ds);
      const workerCpuBefore = cpuSeconds(worker.pid!);
      const u = await upload(server.port, token, campaignId, bigFile);
      const rss = peakRssMb(server.child.pid!);
      const tag = `${(BIG_ROWS / 1e6).toLocaleString('en')} M-row upload (${bigMb.toFixed(0)} MB)`;
      console.log(`  ${tag}: ${u.seconds.toFixed(1)} s (${Math.round(u.rowCount / u.seconds).toLocaleString('en')} rows/s), server peak RSS ${rss.toFixed(0)} MB, load ${load()}`);
      reportFigure({ figure: `${tag} end to end`, measured: `${u.seconds.toFixed(1)} s`, target: BIG_ROWS === 10_000_000 ? '< 30 s' : '< 30 s at 10 M', met: BIG_ROWS === 10_000_000 ? u.seconds < 30 : null });
      reportFigure({ figure: `HTTP server peak RSS during the uploads (after start ${baseRss.toFixed(0)} MB)`, measured: `${rss.toFixed(0)} MB`, target: '< 400 MB', met: rss < 400 });
      const { seconds: s, stages } = await resultSeconds(ds, campaignId, 600_000, 50);
      const wRss = peakRssMb(worker.pid!);
      console.log(`  its result in the worker: ${s.toFixed(2)} s, worker peak RSS ${wRss.toFixed(0)} MB (before ${workerBase.toFixed(0)} MB)`);
      console.log(`    stages: ${stages}; worker CPU ${(cpuSeconds(worker.pid!) - workerCpuBefore).toFixed(2)} s (user + system, while the upload ran and the result was computed)`);
      reportFigure({ figure: `result of the ${(BIG_ROWS / 1e6).toLocaleString('en')} M-sample campaign in a worker (stability, tides, budget)`, measured: `${s.toFixed(2)} s (worker RSS ${wRss.toFixed(0)} MB)`, target: '< 10 s', met: BIG_ROWS === 10_000_000 ? s < 10 : null });
      const plot = await plotTimes(server.port, token, u.id);
      console.log(`  plot data (2000 buckets over ${u.rowCount} samples): first ${plot.first.toFixed(0)} ms, median ${plot.median.toFixed(0)} ms`);
      reportFigure({ figure: `plot data, 2000 buckets over ${(BIG_ROWS / 1e6).toLocaleString('en')} M samples (first / median of 7)`, measured: `${plot.first.toFixed(0)} / ${plot.median.toFixed(0)} ms`, target: '< 200 ms', met: plot.first < 200 });
    } else {
      reportFigure({ figure: `plot data, 2000 buckets over ${ROWS.toLocaleString('en')} samples (first / median of 7)`, measured: `${plot1.first.toFixed(0)} / ${plot1.median.toFixed(0)} ms`, target: '< 200 ms', met: plot1.first < 200 });
    }
  } finally {
    worker?.kill('SIGTERM');
    server.child.kill(process.env.CHILD_STOP === 'TERM' ? 'SIGTERM' : 'SIGKILL');
    await new Promise((r) => setTimeout(r, 1500));
    await ds.destroy();
    await stopBenchTsa();
    cluster.stop();
    fs.rmSync(tmp, { recursive: true, force: true });
  }
}

await main();
