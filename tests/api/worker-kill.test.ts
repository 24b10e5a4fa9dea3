import { spawn, type ChildProcess } from 'node:child_process';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { stopQueues } from '../../server/jobs/queue';
import { computeRunResult, type StoredInputs } from '../../server/network/adjustment.service';
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
    SECRETS_DIR: t.config.secretsDir, SMTP_URL: t.config.smtpUrl, LOG_LEVEL: 'info', NODE_ENV: 'test', ...extraEnv,
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
    const jobs = await t.ds.query(jobsSql, [runId]);
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
