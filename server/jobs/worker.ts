import { pathToFileURL } from 'node:url';
import type PgBoss from 'pg-boss';
import type { Logger } from 'pino';
import type { DataSource } from 'typeorm';
import { executeRun } from '../network/adjustment.service';
import { ADJUSTMENT_QUEUE, startBoss, type AdjustmentJob } from './queue';

// The worker: takes 'adjustment-run' jobs from the queue and executes them, writing progress into the run row.
// `npm start` runs one as a process of its own beside the HTTP process (`npm run worker`); CHRONOLEVEL_INLINE_WORKER=1
// runs one inside the HTTP process instead. More workers, on this or other machines, run
//   DATABASE_URL=postgres://… npm run worker
// against the same database; pg-boss hands each job to exactly one of them.

export type Worker = { stop: () => Promise<void> };

export async function startWorker(opts: { dataSource: DataSource; databaseUrl: string; logger?: Logger; pollingIntervalSeconds?: number; reapIntervalMs?: number }): Promise<Worker> {
  const boss = await startBoss(opts.databaseUrl);
  await boss.work<AdjustmentJob>(ADJUSTMENT_QUEUE, { pollingIntervalSeconds: opts.pollingIntervalSeconds ?? 0.5, batchSize: 1 }, async (jobs) => {
    for (const job of jobs) {
      await withRunLock(opts.dataSource, job.data.runId, async () => {
        opts.logger?.info({ runId: job.data.runId, jobId: job.id }, 'adjustment run started');
        await executeRun(opts.dataSource, job.data.runId);
        opts.logger?.info({ runId: job.data.runId, jobId: job.id }, 'adjustment run finished');
      });
    }
  });
  // Jobs of workers that are gone are handed back at start and then every few seconds (see reapOrphanedJobs).
  const reap = () => reapOrphanedJobs(boss, opts.dataSource, opts.logger).catch((e) => opts.logger?.error({ err: e }, 'looking for orphaned jobs failed'));
  await reap();
  const reaper = setInterval(() => void reap(), opts.reapIntervalMs ?? 5000);
  return {
    stop: async () => {
      clearInterval(reaper);
      await boss.stop({ graceful: false, wait: true });
    },
  };
}

// A killed worker's job. pg-boss 10 has no heartbeat: an 'active' job is only failed (and retried) once its
// expiry (60 min) passes. So each job runs while its worker holds a PostgreSQL session advisory lock on the run;
// PostgreSQL drops the lock the moment that worker's connection goes (process killed, machine gone once TCP
// keepalive notices). Any worker that finds an 'active' job older than a short grace whose lock nobody holds fails
// it, and pg-boss retries it (retryLimit, retryDelay). The same lock keeps two attempts of one run from ever
// executing at once, and executeRun skips a run that is already done: a retried run finishes exactly once.
const RUN_LOCK_CLASS = 0x6164; // first key of the two-key advisory lock: 'ad'justment runs
const ORPHAN_GRACE_SECONDS = 10;

async function withRunLock(dataSource: DataSource, runId: string, body: () => Promise<void>) {
  const qr = dataSource.createQueryRunner();
  await qr.connect();
  try {
    await qr.query('SELECT pg_advisory_lock($1, hashtext($2))', [RUN_LOCK_CLASS, runId]);
    try {
      await body();
    } finally {
      await qr.query('SELECT pg_advisory_unlock($1, hashtext($2))', [RUN_LOCK_CLASS, runId]);
    }
  } finally {
    await qr.release();
  }
}

/** Fails the 'active' adjustment jobs whose worker is gone, so pg-boss retries them; returns how many. */
export async function reapOrphanedJobs(boss: PgBoss, dataSource: DataSource, logger?: Logger): Promise<number> {
  const active = (await dataSource.query(
    `SELECT id, data->>'runId' AS run_id FROM pgboss.job WHERE name = $1 AND state = 'active' AND started_on < now() - $2 * interval '1 second'`,
    [ADJUSTMENT_QUEUE, ORPHAN_GRACE_SECONDS],
  )) as { id: string; run_id: string }[];
  let reaped = 0;
  for (const job of active) {
    const qr = dataSource.createQueryRunner();
    await qr.connect();
    try {
      const [{ free }] = await qr.query('SELECT pg_try_advisory_lock($1, hashtext($2)) AS free', [RUN_LOCK_CLASS, job.run_id]);
      if (!free) continue; // its worker is alive and holds the run
      try {
        await boss.fail(ADJUSTMENT_QUEUE, job.id, { message: 'the worker running this job stopped; handed to another worker' });
        reaped++;
        const after = await boss.getJobById(ADJUSTMENT_QUEUE, job.id);
        if (after?.state === 'failed') {
          // no retries left: the run must not stay 'running' for ever
          await dataSource.query(
            `UPDATE adjustment_run SET state = 'failed', stage = 'failed', error = $2, finished_at = now() WHERE id = $1 AND state IN ('queued', 'running')`,
            [job.run_id, JSON.stringify({ message: 'The worker executing this run stopped and no retries are left.' })],
          );
        }
        logger?.warn({ runId: job.run_id, jobId: job.id, retried: after?.state !== 'failed' }, 'adjustment job of a stopped worker handed back');
      } finally {
        await qr.query('SELECT pg_advisory_unlock($1, hashtext($2))', [RUN_LOCK_CLASS, job.run_id]);
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
  const dataSource = await openDatabase(config.databaseUrl, { migrate: false });
  const worker = await startWorker({ dataSource, databaseUrl: config.databaseUrl, logger });
  // The periodic work of a deployment lives in the workers: the mail outbox sender (row locks let any number of
  // senders share it) and the 15-minute audit checkpoint (a no-op when nothing was added since the last one).
  const mail = createMailSender({ dataSource, smtpUrl: config.smtpUrl, from: config.mailFrom, logger, retry: config.mailRetry });
  mail.start();
  const checkpoints = setInterval(() => void writeAuditCheckpoint(dataSource, 'every 15 minutes').catch((e) => logger.error({ err: e }, 'audit checkpoint failed')), 15 * 60_000);
  logger.info('worker waiting for jobs (adjustment runs), sending mail, writing audit checkpoints');
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
