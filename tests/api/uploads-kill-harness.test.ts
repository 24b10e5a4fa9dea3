import { spawn, spawnSync, type ChildProcess } from 'node:child_process';
import crypto from 'node:crypto';
import fs from 'node:fs';
import http from 'node:http';
import os from 'node:os';
import path from 'node:path';
import pino from 'pino';
import type { DataSource } from 'typeorm';
import { afterAll, beforeAll, describe, expect, inject, it } from 'vitest';
// @ts-expect-error plain ESM helper shared with `npm start`
import { freePort, startCluster } from '../../scripts/lib/postgres.mjs';
import { createApp } from '../../server/app';
import { loadConfig } from '../../server/config';
import { openDatabase } from '../../server/db/data-source';
import { FAULT_POINTS, resumeFileFor, type FaultPointName } from '../../server/dev/fault-point';
import { createMailSender } from '../../server/mail/outbox';
import { seedDemo } from '../../seeds/demo';
import { acceptedCampaign } from '../helpers/accepted-campaign';
import { tokenFor, type TestApp } from '../helpers/test-app';
import { insertUploadCampaign } from '../helpers/uploads-campaign';

// Kill harness: at six points of an upload and of what follows it (before the COPY, mid-COPY, while the raw file's
// parts are written, before COMMIT, during the result computation, during certificate issue) the server process is
// SIGKILLed, or PostgreSQL is stopped at once (pg_ctl stop -m immediate) and started again. Afterwards: no partial
// series (0 or all rows, counts consistent), no result or certificate half-made, no session idle in transaction, and
// (PostgreSQL stop) the surviving server's pool back at its baseline. Runs on a cluster of its own with fsync on and
// refuses to run otherwise. Rows per upload: CHRONOLEVEL_KILL_ROWS (default 200 000; `npm run bench -- kill` and
// CHRONOLEVEL_KILL_ROWS=1000000 run the full million).
const ROWS = Number(process.env.CHRONOLEVEL_KILL_ROWS ?? 200_000);
const tmp = fs.mkdtempSync(path.join(os.tmpdir(), 'chronolevel-kill-'));
const dataDir = path.join(tmp, 'pg');
let cluster: { url: string; port: number; stop: () => void };
let ds: DataSource;
let t: TestApp;
let operator: string;
let coordinator: string;
const csvFile = path.join(tmp, 'big.csv');
const children = new Set<ChildProcess>();

function pgCtl(args: string[]) {
  const bin = fs.readdirSync('/usr/lib/postgresql').sort((a, b) => Number(b) - Number(a))[0];
  const exe = path.join('/usr/lib/postgresql', bin, 'bin', 'pg_ctl');
  const asRoot = process.getuid?.() === 0;
  const user = spawnSync('id', ['-u', 'postgres']).status === 0 ? 'postgres' : 'chronolevel-db';
  const r = asRoot ? spawnSync('runuser', ['-u', user, '--', exe, ...args], { encoding: 'utf8' }) : spawnSync(exe, args, { encoding: 'utf8' });
  if (r.status !== 0) throw new Error(`pg_ctl ${args.join(' ')}: ${r.stderr || r.stdout}`);
}

async function startPg() {
  const before = process.env.PG_FSYNC;
  process.env.PG_FSYNC = 'on'; // this cluster must be durable, whatever the rest of the test run uses
  try {
    cluster = await startCluster({ dataDir, port: cluster?.port ?? (await freePort()), database: 'killharness', log: () => {} });
  } finally {
    if (before === undefined) delete process.env.PG_FSYNC;
    else process.env.PG_FSYNC = before;
  }
}

async function query<T>(sql: string, params: unknown[] = []): Promise<T[]> {
  for (let attempt = 0; ; attempt++) {
    try {
      return (await ds.query(sql, params)) as T[];
    } catch (e) {
      if (attempt >= 20) throw e;
      await new Promise((r) => setTimeout(r, 250)); // connections that died with the server are replaced
    }
  }
}

beforeAll(async () => {
  await startPg();
  ds = await openDatabase(cluster.url);
  for (const setting of ['fsync', 'synchronous_commit', 'full_page_writes']) {
    const [row] = (await ds.query(`SHOW ${setting}`)) as Record<string, string>[];
    if (row[setting] !== 'on') throw new Error(`durability test refused: ${setting} is ${row[setting]}; the kill harness needs fsync, synchronous_commit and full_page_writes on`);
  }
  process.env.SECRETS_DIR = inject('secretsDir');
  await seedDemo(ds);
  const config = loadConfig({
    NODE_ENV: 'test', DATABASE_URL: cluster.url, SECRETS_DIR: inject('secretsDir'), SESSION_SECRET: 'kill-harness-session-secret-0123', IDP_URL: inject('idpUrl'),
    IDP_CERT_FILE: inject('idpCertFile'), SMTP_URL: inject('smtpUrl'), MAILBOX_URL: inject('mailboxUrl'), LOG_LEVEL: 'silent',
    TSA_URL: inject('tsaUrl'), TSA_ROOT_CERT_FILE: inject('tsaRootCertFile'),
  });
  const logger = pino({ level: 'silent' });
  const mail = createMailSender({ dataSource: ds, smtpUrl: config.smtpUrl, from: config.mailFrom, logger });
  const app = createApp({ config, dataSource: ds, logger, mail });
  t = { app, ds, config, databaseUrl: cluster.url, ownerUrl: cluster.url, deps: { config, dataSource: ds, logger, mail }, startJobs: async () => undefined, close: async () => undefined };
  operator = await tokenFor(t, 'ines.varga@saltmarsh-lab.invalid');
  coordinator = await tokenFor(t, 'ansel.brandt@geopotential-office.invalid');
  const fd = fs.openSync(csvFile, 'w');
  let s = '';
  for (let i = 0; i < ROWS; i++) {
    s += `${(61100 + i / 86400).toFixed(9)},${(1e-16 * Math.sin(i)).toExponential(6)}\n`;
    if (s.length > 1 << 20) {
      fs.writeSync(fd, s);
      s = '';
    }
  }
  fs.writeSync(fd, s);
  fs.closeSync(fd);
  await app.locals.closeSessionPool?.();
}, 300_000);

afterAll(async () => {
  for (const c of children) c.kill('SIGKILL');
  await ds?.destroy().catch(() => undefined);
  cluster?.stop();
  fs.rmSync(tmp, { recursive: true, force: true });
});

const reportDir = fs.mkdtempSync(path.join(os.tmpdir(), 'chronolevel-kill-reports-'));

/**
 * What the child is doing now: its CPU use over one second, and the top of its JavaScript stack from a diagnostic
 * report (written by the event loop: no report while the loop is blocked, itself a finding).
 */
async function childState(child: ChildProcess): Promise<{ cpuPercentOverOneSecond: number | null; stack: string[] }> {
  const pid = child.pid;
  if (!pid || child.exitCode !== null || child.signalCode !== null) return { cpuPercentOverOneSecond: null, stack: [`(exited: code ${child.exitCode}, signal ${child.signalCode})`] };
  const cpu = () => {
    try {
      const f = fs.readFileSync(`/proc/${pid}/stat`, 'utf8').split(') ')[1].split(' ');
      return (Number(f[11]) + Number(f[12])) / 100;
    } catch {
      return null;
    }
  };
  const c0 = cpu();
  await new Promise((r) => setTimeout(r, 1000));
  const c1 = cpu();
  const cpuSeconds = c0 === null || c1 === null ? null : Math.round((c1 - c0) * 100);
  const before = new Set(fs.readdirSync(reportDir));
  child.kill('SIGUSR2');
  for (let i = 0; i < 50; i++) {
    const fresh = fs.readdirSync(reportDir).filter((f) => !before.has(f) && f.endsWith('.json'));
    if (fresh.length) {
      await new Promise((r) => setTimeout(r, 200));
      try {
        const report = JSON.parse(fs.readFileSync(path.join(reportDir, fresh[0]), 'utf8')) as { javascriptStack?: { message?: string; stack?: string[] } };
        return { cpuPercentOverOneSecond: cpuSeconds, stack: [report.javascriptStack?.message ?? '', ...(report.javascriptStack?.stack ?? []).slice(0, 25)] };
      } catch (e) {
        return { cpuPercentOverOneSecond: cpuSeconds, stack: [`(report unreadable: ${(e as Error).message})`] };
      }
    }
    await new Promise((r) => setTimeout(r, 100));
  }
  return { cpuPercentOverOneSecond: cpuSeconds, stack: ['(no report within 5 s)'] };
}

type Server = { child: ChildProcess; port: number; faults: string[]; exited: Promise<void>; /** the child's last log lines (warn and above) */ log: string[] };

async function startServer(faultPoint: FaultPointName | null): Promise<Server> {
  const env: Record<string, string> = {
    DATABASE_URL: cluster.url, SESSION_SECRET: 'kill-harness-session-secret-0123', IDP_CERT_FILE: inject('idpCertFile'), SECRETS_DIR: inject('secretsDir'),
    LOG_LEVEL: 'silent', NODE_ENV: 'test', UPLOAD_IDLE_TIMEOUT_MS: '600000', TSA_URL: inject('tsaUrl'), TSA_ROOT_CERT_FILE: inject('tsaRootCertFile'),
  };
  if (faultPoint) env.CHRONOLEVEL_FAULT_POINT = faultPoint;
  // SIGUSR2 makes the child write a diagnostic report (its JavaScript stack even when its event loop is busy): a
  // timeout below states the stack, so a stuck server can be told from a slow one.
  const child = spawn(process.execPath, ['--report-on-signal', '--report-signal=SIGUSR2', `--report-directory=${reportDir}`, '--import', 'tsx', 'tests/helpers/upload-server.ts'], {
    // the result is computed by a job: the child runs a worker too, so the kill point inside the computation is reached
    env: { ...process.env, ...env, CHRONOLEVEL_CHILD_ENV: JSON.stringify(env), CHRONOLEVEL_CHILD_WORKER: '1', CHRONOLEVEL_CHILD_LOG_LEVEL: 'info' }, stdio: ['ignore', 'pipe', 'pipe'],
  });
  // the child's log (pino lines on stderr) is kept, not shown: a timeout below states its last lines
  const log: string[] = [];
  let partial = '';
  child.stderr!.on('data', (d: Buffer) => {
    const lines = (partial + d.toString()).split('\n');
    partial = lines.pop() ?? '';
    for (const line of lines) if (line.trim()) log.push(line.length > 600 ? `${line.slice(0, 600)}…` : line);
    if (log.length > 60) log.splice(0, log.length - 60);
  });
  children.add(child);
  const exited = new Promise<void>((r) => child.once('exit', () => r()));
  const faults: string[] = [];
  const port: number = await new Promise((resolve, reject) => {
    child.once('exit', () => reject(new Error('server exited before listening')));
    child.stdout!.on('data', (d: Buffer) => {
      const text = d.toString();
      for (const m of text.matchAll(/FAULT ([a-z-]+)/g)) faults.push(m[1]);
      const l = /LISTENING (\d+)/.exec(text);
      if (l) resolve(Number(l[1]));
    });
  });
  return { child, port, faults, exited, log };
}

/** Streams the big CSV as a multipart upload; resolves with the status (or 0 when the connection broke). */
function streamUpload(port: number, campaignId: string): Promise<number> {
  return new Promise((resolve) => {
    const boundary = `----kill${crypto.randomBytes(6).toString('hex')}`;
    const head = Object.entries({ epochColumn: '1', epochKind: 'mjd', valueColumn: '2', valueKind: 'offset' })
      .map(([k, v]) => `--${boundary}\r\nContent-Disposition: form-data; name="${k}"\r\n\r\n${v}\r\n`).join('')
      + `--${boundary}\r\nContent-Disposition: form-data; name="file"; filename="big.csv"\r\nContent-Type: text/csv\r\n\r\n`;
    const req = http.request({
      host: '127.0.0.1', port, method: 'POST', path: `/api/v1/campaigns/${campaignId}/uploads`,
      headers: { authorization: `Bearer ${operator}`, 'content-type': `multipart/form-data; boundary=${boundary}`, 'transfer-encoding': 'chunked' },
    }, (res) => {
      res.resume();
      res.on('end', () => resolve(res.statusCode ?? 0));
      res.on('error', () => resolve(0));
    });
    req.on('error', () => resolve(0));
    req.write(head);
    const file = fs.createReadStream(csvFile);
    file.pipe(req, { end: false });
    file.on('end', () => req.end(`\r\n--${boundary}--\r\n`));
    req.on('close', () => file.destroy());
  });
}

function post(port: number, pathName: string, token: string, body: object = {}): Promise<number> {
  return new Promise((resolve) => {
    const req = http.request({ host: '127.0.0.1', port, method: 'POST', path: pathName, headers: { authorization: `Bearer ${token}`, 'content-type': 'application/json' } }, (res) => {
      res.resume();
      res.on('end', () => resolve(res.statusCode ?? 0));
      res.on('error', () => resolve(0));
    });
    req.on('error', () => resolve(0));
    req.end(JSON.stringify(body));
  });
}

/** Waits for `cond`; a timeout names what was awaited and, when `what` is a function, the state last seen. */
async function until(cond: () => boolean | Promise<boolean>, ms: number, what: string | (() => string)) {
  const end = Date.now() + ms;
  while (!(await cond())) {
    if (Date.now() > end) throw new Error(`timed out waiting for ${typeof what === 'string' ? what : what()}`);
    await new Promise((r) => setTimeout(r, 25));
  }
}

async function health(port: number): Promise<{ status: string; pool?: { inUse: number; waiting: number } } | null> {
  try {
    const r = await fetch(`http://127.0.0.1:${port}/api/health`);
    return (await r.json()) as { status: string; pool?: { inUse: number; waiting: number } };
  } catch {
    return null;
  }
}

const idleInTransaction = () =>
  query<{ n: number }>("SELECT count(*)::int AS n FROM pg_stat_activity WHERE datname = current_database() AND state LIKE 'idle in transaction%'");

type Snapshot = Record<string, number>;
async function snapshot(campaignId: string): Promise<Snapshot> {
  const [r] = await query<Snapshot>(
    `SELECT (SELECT count(*)::int FROM ratio_series WHERE campaign_id = $1) AS series,
            (SELECT count(*)::int FROM ratio_sample s JOIN ratio_series r ON r.id = s.series_id WHERE r.campaign_id = $1) AS samples,
            (SELECT count(*)::int FROM ratio_sample) AS "allSamples",
            (SELECT count(*)::int FROM ratio_series_file) AS "fileParts",
            (SELECT count(*)::int FROM comparison_result WHERE campaign_id = $1) AS results,
            (SELECT count(*)::int FROM certificate WHERE campaign_id = $1) AS certificates,
            -- serial numbers taken, less those of other campaigns' certificates (a certificate request queued in an
            -- earlier scenario is retried by this scenario's worker and may take one meanwhile)
            ((SELECT coalesce(sum(last_serial), 0)::int FROM certificate_serial)
              - (SELECT count(DISTINCT (year, serial))::int FROM certificate WHERE campaign_id <> $1)) AS serials,
            -- every event, except what retried jobs of earlier scenarios may finish meanwhile for other campaigns
            -- (results, certificates and their state changes) and ratio closures (jobs queued by earlier acceptances)
            (SELECT count(*)::int FROM audit_event WHERE NOT (action = 'result.computed' AND entity_id IS DISTINCT FROM $1::text) AND action <> 'closure.computed'
               AND NOT (entity_type = 'campaign' AND entity_id IS DISTINCT FROM $1::text)
               AND NOT (entity_type = 'certificate' AND details->>'campaignId' IS DISTINCT FROM $1::text)) AS "auditEvents"`,
    [campaignId],
  );
  return r;
}

/** Every stored series is complete: its row count matches its samples, and equals the uploaded rows. */
async function seriesConsistent(campaignId: string) {
  const rows = await query<{ row_count: number; samples: number }>(
    'SELECT r.row_count, (SELECT count(*)::int FROM ratio_sample s WHERE s.series_id = r.id) AS samples FROM ratio_series r WHERE r.campaign_id = $1', [campaignId]);
  for (const r of rows) expect(r.samples).toBe(r.row_count);
  return rows;
}

const survived: string[] = [];
const UPLOAD_POINTS = new Set<FaultPointName>(['before-copy', 'mid-copy', 'raw-file-parts', 'before-commit']);

describe.each(['sigkill-server', 'stop-postgres'] as const)('kill harness (%s)', (mode) => {
  it.each([...FAULT_POINTS])(`%s: afterwards 0 or all rows, nothing half-made, no session idle in transaction`, async (point) => {
    let campaignId: string;
    if (UPLOAD_POINTS.has(point)) campaignId = await insertUploadCampaign(ds);
    else {
      const start = Date.parse('2026-09-01T00:00:00Z') + (FAULT_POINTS.indexOf(point) + (mode === 'stop-postgres' ? 6 : 0)) * 3 * 86_400_000;
      campaignId = await acceptedCampaign(t, `Kill harness ${mode} ${point}`, new Date(start).toISOString());
    }
    const before = await snapshot(campaignId);
    const server = await startServer(point);
    const answer = UPLOAD_POINTS.has(point) ? streamUpload(server.port, campaignId)
      : point === 'result-compute' ? post(server.port, `/api/v1/campaigns/${campaignId}/result/recompute`, coordinator)
        : post(server.port, `/api/v1/campaigns/${campaignId}/certificates`, coordinator, { comment: 'Certified after review.', justification: 'Kill-harness campaign: its exceptions are accepted for the test.' });
    await until(() => server.faults.includes(point), 120_000, `fault point ${point}`);

    if (mode === 'sigkill-server') {
      server.child.kill('SIGKILL');
      await server.exited;
      // results and certificates are made by jobs: the request was answered (202, queued) before the worker reached the point
      expect(await answer).toBe(point === 'result-compute' || point === 'certificate-issue' ? 202 : 0);
    } else {
      pgCtl(['-D', dataDir, '-m', 'immediate', '-w', 'stop']);
      await startPg();
      fs.writeFileSync(resumeFileFor(server.child.pid!), '');
      const status = await answer;
      // the request fails, never reporting success (a result or certificate request was only queued: 202)
      expect(status === 0 || status >= 400 || ((point === 'result-compute' || point === 'certificate-issue') && status === 202)).toBe(true);
      // a queued job is retried by the server's worker (after the reaper's 10 s grace): let its request end first
      const requestTable = point === 'result-compute' ? 'result_request' : point === 'certificate-issue' ? 'certificate_request' : null;
      if (requestTable) {
        // on a timeout the message states the request rows and the queue's jobs for the campaign as last seen
        let lastSeen: unknown = null;
        const waitEnd = Date.now() + 90_000;
        let stateTaken = false;
        await until(async () => {
          const open = (await query<{ n: number }>(`SELECT count(*)::int AS n FROM ${requestTable} WHERE campaign_id = $1 AND state IN ('queued', 'running')`, [campaignId]))[0].n;
          if (open > 0) {
            lastSeen = {
              requests: await query(`SELECT state, started_at, finished_at, error FROM ${requestTable} WHERE campaign_id = $1 ORDER BY requested_at`, [campaignId]),
              jobs: await query(`SELECT name, state, retry_count, started_on, completed_on FROM pgboss.job WHERE data->>'campaignId' = $1::text OR data->>'requestId' IN (SELECT id::text FROM ${requestTable} WHERE campaign_id = $1::uuid) ORDER BY created_on`, [campaignId]),
              sessions: await query(`SELECT application_name, state, wait_event_type, wait_event, left(query, 160) AS query, now() - state_change AS for FROM pg_stat_activity WHERE datname = current_database() AND pid <> pg_backend_pid()`),
              locks: await query(`SELECT l.locktype, l.classid, l.objid, l.mode, l.granted, a.application_name, left(a.query, 80) AS query FROM pg_locks l JOIN pg_stat_activity a ON a.pid = l.pid WHERE l.locktype = 'advisory'`),
              serverLog: server.log.slice(-30),
            };
            // near the deadline, once: what the server process is doing
            if (Date.now() > waitEnd - 8_000 && !stateTaken) {
              stateTaken = true;
              (lastSeen as Record<string, unknown>).server = await childState(server.child);
            }
          }
          return open === 0;
        }, 90_000, () => `the ${requestTable} of the campaign done or failed (last seen: ${JSON.stringify(lastSeen)})`);
      }
      // the surviving server recovers: database reachable, pool back at its baseline
      let lastHealth: unknown = null;
      await until(async () => {
        const h = await health(server.port);
        lastHealth = h;
        return h?.status === 'ok' && h.pool?.inUse === 0 && h.pool.waiting === 0;
      }, 20_000, () => `the server pool back at its baseline (last /api/health answer: ${JSON.stringify(lastHealth)})`);
      server.child.kill('SIGTERM');
      await server.exited;
      fs.rmSync(resumeFileFor(server.child.pid!), { force: true });
    }
    children.delete(server.child);

    await until(async () => (await idleInTransaction())[0].n === 0, 10_000, 'no session idle in transaction');
    const after = await snapshot(campaignId);
    const series = await seriesConsistent(campaignId);
    // an interrupted upload leaves no series; the result and certificate campaigns keep their one complete series
    expect(series).toHaveLength(UPLOAD_POINTS.has(point) ? 0 : 1);
    const [c] = await query<{ state: string }>('SELECT state FROM campaign WHERE id = $1', [campaignId]);
    if (point === 'certificate-issue' && after.certificates > 0) {
      // The request was queued (202); after PostgreSQL came back the job was retried and finished it: one whole
      // certificate (the next serial), the campaign certified, the request done — never a half-made one.
      expect(after.certificates).toBe(1);
      expect(after.serials).toBe(before.serials + 1);
      expect({ ...after, auditEvents: 0, certificates: 0, serials: 0 }).toEqual({ ...before, auditEvents: 0, certificates: 0, serials: 0 });
      expect(c.state).toBe('certified');
      const [req] = await query<{ state: string }>('SELECT state FROM certificate_request WHERE campaign_id = $1 ORDER BY requested_at DESC LIMIT 1', [campaignId]);
      expect(req.state).toBe('done');
    } else if (point === 'result-compute' && after.results > before.results) {
      // The same for a result: the retried job stored one whole result and marked its request done.
      expect(after.results).toBe(before.results + 1);
      expect({ ...after, auditEvents: 0, results: 0 }).toEqual({ ...before, auditEvents: 0, results: 0 });
      const [req] = await query<{ state: string }>('SELECT state FROM result_request WHERE campaign_id = $1 ORDER BY requested_at DESC LIMIT 1', [campaignId]);
      expect(req.state).toBe('done');
    } else {
      // every point lies before the commit: nothing of the interrupted work may be visible
      expect({ ...after, auditEvents: 0 }).toEqual({ ...before, auditEvents: 0 });
      // (a certificate request is audited when it is asked for; the interrupted issue itself left nothing)
      expect(after.auditEvents).toBe(before.auditEvents + (point === 'certificate-issue' ? 1 : 0));
      if (point === 'certificate-issue') expect(c.state).toBe('accepted');
    }
    survived.push(`${mode}:${point}`);
  }, 300_000);
});

describe('after the kills', () => {
  it('a complete upload stores all rows, and every kill point was survived', async () => {
    const campaignId = await insertUploadCampaign(ds);
    const server = await startServer(null);
    const status = await streamUpload(server.port, campaignId);
    expect(status).toBe(201);
    const series = await seriesConsistent(campaignId);
    expect(series.map((s) => s.row_count)).toEqual([ROWS]);
    // the upload's result (and then the closures it touches) are computed by the server's worker: wait for it to be idle
    await until(async () => {
      const h = await health(server.port);
      return h?.status === 'ok' && h.pool?.inUse === 0 && h.pool.waiting === 0;
    }, 60_000, 'the server pool back at its baseline after the upload');
    server.child.kill('SIGTERM');
    await server.exited;
    children.delete(server.child);
    expect(survived).toHaveLength(2 * FAULT_POINTS.length);
  }, 300_000);
});
