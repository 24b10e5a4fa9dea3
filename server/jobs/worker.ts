import { pathToFileURL } from 'node:url';
import type PgBoss from 'pg-boss';
import type { Logger } from 'pino';
import type { DataSource } from 'typeorm';
import { runCertificateJob } from '../certificates/certificate-requests';
import type { AppConfig } from '../config';
import { executeRun } from '../network/adjustment.service';
import { stopAdjustmentThreads } from '../network/adjustment-thread';
import { runResultJob } from '../results/result-worker';
import { recomputeClosures } from '../closures/closures.service';
import { ADJUSTMENT_QUEUE, CERTIFICATE_QUEUE, CLOSURE_QUEUE, JOB_QUEUES, RESULT_QUEUE, startBoss, type AdjustmentJob, type CertificateJob, type ClosureJob, type ResultJob } from './queue';

// The worker: takes 'adjustment-run' jobs (progress into the run row), 'result-compute' jobs (state in
// result_request, stage and fraction in job_progress) and 'certificate-issue' jobs (certificate_request and
// job_progress) from the queue and executes them.
// `npm start` runs one as a process of its own beside the HTTP process (`npm run worker`); CHRONOLEVEL_INLINE_WORKER=1
// runs one inside the HTTP process instead. More workers, on this or other machines, run
//   DATABASE_URL=postgres://… npm run worker
// against the same database; pg-boss hands each job to exactly one of them.

export type Worker = { stop: () => Promise<void> };

let outageGuard = false;

/** `config` (signing key, time-stamp authority, review rules) is needed for certificate jobs; without it this worker leaves them to others. */
export async function startWorker(opts: { dataSource: DataSource; databaseUrl: string; config?: AppConfig; logger?: Logger; pollingIntervalSeconds?: number; reapIntervalMs?: number }): Promise<Worker> {
  // While PostgreSQL is away, pg-boss's own bookkeeping (marking a failed job) rejects outside any handler of ours.
  // A database outage must not end the worker process: log it; pg-boss and the orphan reaper resume when it returns.
  if (!outageGuard) {
    outageGuard = true;
    process.on('unhandledRejection', (e) => {
      const code = (e as { code?: string } | null)?.code;
      if (code && ['ECONNREFUSED', 'ECONNRESET', '57P01', '57P03', 'EPIPE'].includes(code)) opts.logger?.warn({ err: e }, 'database unreachable; the worker waits for it');
      else throw e;
    });
  }
  const boss = await startBoss(opts.databaseUrl);
  await boss.work<AdjustmentJob>(ADJUSTMENT_QUEUE, { pollingIntervalSeconds: opts.pollingIntervalSeconds ?? 0.5, batchSize: 1 }, async (jobs) => {
    for (const job of jobs) {
      await withJobLock(opts.dataSource, job.id, async () => {
        opts.logger?.info({ runId: job.data.runId, jobId: job.id }, 'adjustment run started');
        await executeRun(opts.dataSource, job.data.runId);
        opts.logger?.info({ runId: job.data.runId, jobId: job.id }, 'adjustment run finished');
      });
    }
  });
  await boss.work<ResultJob>(RESULT_QUEUE, { pollingIntervalSeconds: opts.pollingIntervalSeconds ?? 0.5, batchSize: 1 }, async (jobs) => {
    for (const job of jobs) {
      await withJobLock(opts.dataSource, job.id, async () => {
        opts.logger?.info({ campaignId: job.data.campaignId, jobId: job.id }, 'result computation started');
        await runResultJob(opts.dataSource, job.id, job.data);
        opts.logger?.info({ campaignId: job.data.campaignId, jobId: job.id }, 'result computation finished');
        // A new result can change the closures of every loop the campaign is in.
        await boss.send(CLOSURE_QUEUE, { reason: 'result', campaignId: job.data.campaignId } satisfies ClosureJob);
      });
    }
  });
  await boss.work<ClosureJob>(CLOSURE_QUEUE, { pollingIntervalSeconds: opts.pollingIntervalSeconds ?? 0.5, batchSize: 1 }, async (jobs) => {
    for (const job of jobs) {
      await withJobLock(opts.dataSource, job.id, async () => {
        const done = await opts.dataSource.transaction((m) => recomputeClosures(m, { now: new Date() }));
        opts.logger?.info({ jobId: job.id, reason: job.data.reason, campaignId: job.data.campaignId, ...done }, 'ratio closures computed');
      });
    }
  });
  const config = opts.config;
  if (config) {
    await boss.work<CertificateJob>(CERTIFICATE_QUEUE, { pollingIntervalSeconds: opts.pollingIntervalSeconds ?? 0.5, batchSize: 1 }, async (jobs) => {
      for (const job of jobs) {
        await withJobLock(opts.dataSource, job.id, async () => {
          opts.logger?.info({ requestId: job.data.requestId, jobId: job.id }, 'certificate issue started');
          const outcome = await runCertificateJob(opts.dataSource, config, job.data);
          opts.logger?.info({ requestId: job.data.requestId, jobId: job.id, outcome }, 'certificate issue finished');
        });
      }
    });
  }
  // Jobs of workers that are gone are handed back at start and then every few seconds (see reapOrphanedJobs).
  const reap = () => reapOrphanedJobs(boss, opts.dataSource, opts.logger).catch((e) => opts.logger?.error({ err: e }, 'looking for orphaned jobs failed'));
  await reap();
  const reaper = setInterval(() => void reap(), opts.reapIntervalMs ?? 5000);
  return {
    stop: async () => {
      clearInterval(reaper);
      // A run in progress is left open: its thread ends here, its job fails and another worker retries it.
      await stopAdjustmentThreads();
      await boss.stop({ graceful: false, wait: true });
    },
  };
}

// A killed worker's job. pg-boss 10 has no heartbeat: an 'active' job is only failed (and retried) once its
// expiry (60 min for adjustments, 30 for results) passes. So each job runs while its worker holds a PostgreSQL
// session advisory lock on the job id; PostgreSQL drops the lock the moment that worker's connection goes (process
// killed; a machine gone once TCP keepalive notices). Any worker that finds an 'active' job older than a short
// grace whose lock nobody holds fails it, and pg-boss retries it (retryLimit, retryDelay; a retry keeps the job id).
// The same lock keeps two attempts of one job from ever executing at once; executeRun skips a run already done and
// a result is computed in one transaction, which a killed worker's connection rolls back: each job finishes once.
const JOB_LOCK_CLASS = 0x6a62; // first key of the two-key advisory lock: 'jb'
const ORPHAN_GRACE_SECONDS = 10;

async function withJobLock(dataSource: DataSource, jobId: string, body: () => Promise<void>) {
  const qr = dataSource.createQueryRunner();
  await qr.connect();
  try {
    await qr.query('SELECT pg_advisory_lock($1, hashtext($2))', [JOB_LOCK_CLASS, jobId]);
    try {
      await body();
    } finally {
      await qr.query('SELECT pg_advisory_unlock($1, hashtext($2))', [JOB_LOCK_CLASS, jobId]);
    }
  } finally {
    await qr.release();
  }
}

/** What a job whose retries are used up leaves behind: its durable progress row says failed, never 'running'. */
async function markGivenUp(dataSource: DataSource, queue: string, jobId: string, data: Record<string, unknown>) {
  const message = 'The worker executing this job stopped and no retries are left.';
  if (queue === ADJUSTMENT_QUEUE) {
    await dataSource.query(
      `UPDATE adjustment_run SET state = 'failed', stage = 'failed', error = $2, finished_at = now() WHERE id = $1 AND state IN ('queued', 'running')`,
      [data.runId, JSON.stringify({ message })],
    );
  } else if (queue === RESULT_QUEUE) {
    await dataSource.query(`UPDATE result_request SET state = 'failed', finished_at = now(), error = $2 WHERE job_id = $1 AND state IN ('queued', 'running')`, [jobId, message]);
  } else if (queue === CERTIFICATE_QUEUE) {
    await dataSource.query(`UPDATE certificate_request SET state = 'failed', finished_at = now(), error = $2 WHERE id = $1 AND state IN ('queued', 'running')`, [data.requestId, message]);
  }
}

/** Fails the 'active' jobs whose worker is gone, so pg-boss retries them; returns how many. */
export async function reapOrphanedJobs(boss: PgBoss, dataSource: DataSource, logger?: Logger): Promise<number> {
  const active = (await dataSource.query(
    `SELECT id, name, data FROM pgboss.job WHERE name = ANY($1) AND state = 'active' AND started_on < now() - $2 * interval '1 second'`,
    [JOB_QUEUES, ORPHAN_GRACE_SECONDS],
  )) as { id: string; name: string; data: Record<string, unknown> }[];
  let reaped = 0;
  for (const job of active) {
    const qr = dataSource.createQueryRunner();
    await qr.connect();
    try {
      const [{ free }] = await qr.query('SELECT pg_try_advisory_lock($1, hashtext($2)) AS free', [JOB_LOCK_CLASS, job.id]);
      if (!free) continue; // its worker is alive and holds the job
      try {
        await boss.fail(job.name, job.id, { message: 'the worker running this job stopped; handed to another worker' });
        reaped++;
        const after = await boss.getJobById(job.name, job.id);
        if (after?.state === 'failed') await markGivenUp(dataSource, job.name, job.id, job.data);
        logger?.warn({ queue: job.name, jobId: job.id, runId: job.data.runId, campaignId: job.data.campaignId, requestId: job.data.requestId, retried: after?.state !== 'failed' }, 'job of a stopped worker handed back');
      } finally {
        await qr.query('SELECT pg_advisory_unlock($1, hashtext($2))', [JOB_LOCK_CLASS, job.id]);
      }
    } finally {
      await qr.release();
    }
  }
  return reaped;
}

async function main() {
  const { loadConfig } = await import('../config');
  const { openDatabase } = await import('../db/data-source');
  const { createLogger } = await import('../logger');
  const { createMailSender } = await import('../mail/outbox');
  const { writeAuditCheckpoint } = await import('../audit/verify');
  const config = loadConfig();
  const logger = createLogger(config.logLevel).child({ process: 'worker' });
  // Connects as the application role (DATABASE_URL), like the HTTP process; migrations are never run from here.
  const dataSource = await openDatabase(config.databaseUrl, {
    migrate: false,
    pool: { max: config.db.poolMax, idleInTransactionTimeoutMs: config.db.idleInTransactionTimeoutMs },
  });
  const worker = await startWorker({ dataSource, databaseUrl: config.databaseUrl, config, logger });
  // The periodic work of a deployment lives in the workers: the mail outbox sender (row locks let any number of
  // senders share it) and the 15-minute audit checkpoint (a no-op when nothing was added since the last one).
  const mail = createMailSender({ dataSource, smtpUrl: config.smtpUrl, from: config.mailFrom, logger, retry: config.mailRetry });
  mail.start();
  const checkpoints = setInterval(() => void writeAuditCheckpoint(dataSource, 'every 15 minutes').catch((e) => logger.error({ err: e }, 'audit checkpoint failed')), 15 * 60_000);
  logger.info('worker waiting for jobs (adjustment runs, result computations, certificates), sending mail, writing audit checkpoints');
  process.send?.({ workerReady: true });
  let stopping = false;
  const stop = async () => {
    if (stopping) return;
    stopping = true;
    clearInterval(checkpoints);
    mail.stop();
    await worker.stop();
    await dataSource.destroy();
    process.exit(0);
  };
  process.on('SIGINT', () => void stop());
  process.on('SIGTERM', () => void stop());
}

if (process.argv[1] && import.meta.url === pathToFileURL(process.argv[1]).href) {
  main().catch((e) => {
    console.error(e);
    process.exit(1);
  });
}
