import { spawn, type ChildProcess } from 'node:child_process';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { stopQueues } from '../../server/jobs/queue';
import { computeRunResult, type StoredInputs } from '../../server/network/adjustment.service';
import { acceptedCampaign } from '../helpers/accepted-campaign';
import { waitForCertificateRequest, waitForResult } from '../helpers/certificates';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';

// A worker process is killed (SIGKILL) while it executes an adjustment run: a second worker takes the job over
// (the dead worker's advisory lock is gone, its 'active' job is failed and retried by pg-boss) and the run finishes
// exactly once, done, with the same result as computing its stored inputs directly.
let t: TestApp;
const children: ChildProcess[] = [];

type Worker = { child: ChildProcess; lines: Record<string, unknown>[]; faults: string[]; exited: Promise<void> };

function startWorkerProcess(extraEnv: Record<string, string> = {}): Promise<Worker> {
  const env = {
    ...process.env,
    DATABASE_URL: t.databaseUrl, SESSION_SECRET: 'worker-kill-session-secret-0123456789', IDP_CERT_FILE: t.config.idpCertFile,
    SECRETS_DIR: t.config.secretsDir, SMTP_URL: t.config.smtpUrl, TSA_URL: t.config.tsaUrl, TSA_ROOT_CERT_FILE: t.config.tsaRootCertFile,
    LOG_LEVEL: 'info', NODE_ENV: 'test', ...extraEnv,
  };
  const child = spawn(process.execPath, ['--import', 'tsx', 'server/jobs/worker.ts'], { env, stdio: ['ignore', 'pipe', 'inherit'] });
  children.push(child);
  const lines: Record<string, unknown>[] = [];
  const faults: string[] = [];
  const exited = new Promise<void>((r) => child.once('exit', () => r()));
  return new Promise((resolve, reject) => {
    let buf = '';
    child.stdout!.on('data', (d: Buffer) => {
      buf += d.toString();
      let i;
      while ((i = buf.indexOf('\n')) >= 0) {
        const l = buf.slice(0, i);
        buf = buf.slice(i + 1);
        try {
          const o = JSON.parse(l) as Record<string, unknown>;
          lines.push(o);
          if (typeof o.msg === 'string' && o.msg.startsWith('worker waiting for jobs')) resolve({ child, lines, faults, exited });
        } catch {
          if (l.startsWith('FAULT ')) faults.push(l.slice(6).trim());
        }
      }
    });
    child.once('exit', (code) => reject(new Error(`worker exited early (${code})`)));
  });
}

const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));

beforeAll(async () => {
  t = await createTestApp();
});
afterAll(async () => {
  for (const c of children) if (c.exitCode === null && c.signalCode === null) c.kill('SIGKILL');
  await stopQueues();
  await t?.close();
});

describe('worker killed during an adjustment run', () => {
  it('is retried by another worker and finishes exactly once', { timeout: 120_000 }, async () => {
    const coordinator = await tokenFor(t, 'ansel.brandt@geopotential-office.invalid');
    // The first worker pauses after the run's first progress report (test-only fault point), so it is killed mid-run.
    const first = await startWorkerProcess({ CHRONOLEVEL_FAULT_POINT: 'adjustment-run' });
    const start = await request(t.app).post('/api/v1/network/runs').set({ authorization: `Bearer ${coordinator}` }).send({ sigmaMmPerSqrtKm: 1 });
    expect(start.status).toBe(202);
    const runId = start.body.id as string;
    const runRow = async () => (await t.ds.query('SELECT state, stage, progress, result IS NOT NULL AS has_result, finished_at FROM adjustment_run WHERE id = $1', [runId]))[0];
    let row = await runRow();
    for (let i = 0; i < 200 && !first.faults.includes('adjustment-run'); i++) await sleep(100);
    expect(first.faults).toEqual(['adjustment-run']);
    for (let i = 0; i < 200 && row.state !== 'running'; i++) {
      await sleep(100);
      row = await runRow();
    }
    // durable progress: the run row says where it is
    expect(row).toMatchObject({ state: 'running', stage: 'loading inputs', has_result: false });
    expect(row.progress).toBeGreaterThan(0);
    expect(first.lines.some((l) => l.msg === 'adjustment run started' && l.runId === runId)).toBe(true);

    first.child.kill('SIGKILL');
    await first.exited;
    const jobsSql = `SELECT id, state, retry_count FROM pgboss.job WHERE name = 'adjustment-run' AND data->>'runId' = $1
      UNION ALL SELECT id, state, retry_count FROM pgboss.archive WHERE name = 'adjustment-run' AND data->>'runId' = $1`;
    const [stuck] = await t.ds.query(jobsSql, [runId]);
    expect(stuck.state).toBe('active'); // pg-boss alone would leave it so until expiry (60 min)

    const second = await startWorkerProcess();
    for (let i = 0; i < 600 && row.state !== 'done' && row.state !== 'failed'; i++) {
      await sleep(100);
      row = await runRow();
    }
    expect(row).toMatchObject({ state: 'done', stage: 'finished', progress: 1, has_result: true });

    // exactly once: one job, completed on its second attempt; the killed worker never finished it, the second did once
    // pg-boss marks the job completed just after the run's own transaction commits
    let jobs = await t.ds.query(jobsSql, [runId]);
    for (let i = 0; i < 200 && jobs[0]?.state === 'active'; i++) {
      await sleep(100);
      jobs = await t.ds.query(jobsSql, [runId]);
    }
    expect(jobs).toHaveLength(1);
    expect(jobs[0]).toMatchObject({ state: 'completed', retry_count: 1 });
    expect(first.lines.filter((l) => l.msg === 'adjustment run finished')).toEqual([]);
    expect(second.lines.filter((l) => l.msg === 'adjustment run finished' && l.runId === runId)).toHaveLength(1);
    expect(second.lines.some((l) => l.msg === 'job of a stopped worker handed back' && l.runId === runId)).toBe(true);
    const [{ runs }] = await t.ds.query("SELECT count(*)::int AS runs FROM adjustment_run WHERE id = $1", [runId]);
    expect(runs).toBe(1);
    // a finished run is immutable (database trigger), so a second completion could not have rewritten it
    await expect(t.ds.query("UPDATE adjustment_run SET stage = 'again' WHERE id = $1", [runId])).rejects.toThrow(/cannot be changed/);

    // consistent: the stored result equals a direct computation on the run's stored inputs
    const [stored] = await t.ds.query('SELECT inputs, result, sigma0, degrees_of_freedom FROM adjustment_run WHERE id = $1', [runId]);
    const direct = computeRunResult(stored.inputs as StoredInputs);
    expect(stored.degrees_of_freedom).toBe(direct.degreesOfFreedom);
    expect(direct.sigma0).not.toBeNull();
    expect(stored.sigma0).toBeCloseTo(direct.sigma0!, 12);
    expect(stored.result.points.map((p: { code: string; c_m2s2: number }) => [p.code, p.c_m2s2])).toEqual(direct.points.map((p) => [p.code, p.c_m2s2]));

    second.child.kill('SIGTERM');
    await second.exited;
  });
});

// The same for a certificate: the worker is killed after it took a serial number, rendered, time-stamped and signed
// the PDF, inside the transaction that would store it. Another worker takes the job over; the request ends done
// with exactly one certificate (its serial the next one: the killed attempt's serial was rolled back with it), one
// 'certificate.issued' audit event and one set of participant mails.
describe('worker killed while it issues a certificate', () => {
  it('is retried by another worker and issues exactly one certificate', { timeout: 180_000 }, async () => {
    const coordinator = await tokenFor(t, 'ansel.brandt@geopotential-office.invalid');
    // no worker of the test before may take this job
    for (const c of children) if (c.exitCode === null && c.signalCode === null) {
      c.kill('SIGKILL');
      await new Promise((r) => c.once('exit', r));
    }
    const campaignId = await acceptedCampaign(t, 'Worker kill certificate campaign', '2026-10-12T00:00:00Z');
    const first = await startWorkerProcess({ CHRONOLEVEL_FAULT_POINT: 'certificate-issue' });
    expect((await waitForResult(t, coordinator, campaignId)).state).toBe('done'); // the first worker computed it
    const [{ last: serialBefore }] = await t.ds.query('SELECT coalesce(max(last_serial), 0)::int AS last FROM certificate_serial WHERE year = $1', [new Date().getUTCFullYear()]);
    const post = await request(t.app).post(`/api/v1/campaigns/${campaignId}/certificates`).set({ authorization: `Bearer ${coordinator}` })
      .send({ comment: 'Certified after review.', justification: 'Test campaign: its exceptions are accepted for the test.' });
    expect(post.status, post.text).toBe(202);
    const requestId = post.body.request.id as string;
    expect(post.headers.location).toBe(`/api/v1/certificate-requests/${requestId}/progress`);
    for (let i = 0; i < 600 && !first.faults.includes('certificate-issue'); i++) await sleep(100);
    expect(first.faults).toEqual(['certificate-issue']);
    // durable progress while the worker sits inside its transaction: signed, not yet stored
    const during = await request(t.app).get(post.headers.location as string).set({ authorization: `Bearer ${coordinator}` });
    expect(during.body).toMatchObject({ state: 'running', stage: 'time-stamping and signing', certificateNumber: null });
    expect(during.body.fraction).toBeGreaterThan(0);
    expect(during.body.fraction).toBeLessThan(1);

    first.child.kill('SIGKILL');
    await first.exited;
    const jobsSql = `SELECT id, state, retry_count FROM pgboss.job WHERE name = 'certificate-issue' AND data->>'requestId' = $1
      UNION ALL SELECT id, state, retry_count FROM pgboss.archive WHERE name = 'certificate-issue' AND data->>'requestId' = $1`;
    expect((await t.ds.query(jobsSql, [requestId]))[0].state).toBe('active');
    expect(await t.ds.query('SELECT id FROM certificate WHERE campaign_id = $1', [campaignId])).toEqual([]);

    const second = await startWorkerProcess();
    const done = await waitForCertificateRequest(t, coordinator, post.headers.location as string, 120_000);
    expect(done).toMatchObject({ state: 'done', stage: 'finished', fraction: 1, created: true });

    const certs = await t.ds.query('SELECT number, serial FROM certificate WHERE campaign_id = $1', [campaignId]);
    expect(certs).toHaveLength(1);
    expect(certs[0].number).toBe(done.certificateNumber);
    expect(certs[0].serial).toBe(serialBefore + 1);
    const jobs = await t.ds.query(jobsSql, [requestId]);
    expect(jobs).toHaveLength(1);
    expect(jobs[0]).toMatchObject({ state: 'completed', retry_count: 1 });
    expect(first.lines.filter((l) => l.msg === 'certificate issue finished')).toEqual([]);
    expect(second.lines.filter((l) => l.msg === 'certificate issue finished' && l.requestId === requestId)).toHaveLength(1);
    const [{ n: issuedEvents }] = await t.ds.query(`SELECT count(*)::int AS n FROM audit_event WHERE action = 'certificate.issued' AND details->>'campaignId' = $1`, [campaignId]);
    expect(issuedEvents).toBe(1);
    const [{ n: mails }] = await t.ds.query('SELECT count(*)::int AS n FROM mail_outbox WHERE subject LIKE $1', [`%(certificate ${done.certificateNumber})`]);
    const [{ n: distinct }] = await t.ds.query('SELECT count(DISTINCT to_address)::int AS n FROM mail_outbox WHERE subject LIKE $1', [`%(certificate ${done.certificateNumber})`]);
    expect(mails).toBeGreaterThan(0);
    expect(mails).toBe(distinct); // one mail per participant, not one per attempt
    const [{ state }] = await t.ds.query('SELECT state FROM campaign WHERE id = $1', [campaignId]);
    expect(state).toBe('certified');

    // a duplicate delivery of the finished job changes nothing
    const { runCertificateJob } = await import('../../server/certificates/certificate-requests');
    expect(await runCertificateJob(t.ds, t.config, { requestId })).toBe('already-done');
    expect(await t.ds.query('SELECT id FROM certificate WHERE campaign_id = $1', [campaignId])).toHaveLength(1);

    second.child.kill('SIGTERM');
    await second.exited;
  });
});
