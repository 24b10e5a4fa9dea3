import { pathToFileURL } from 'node:url';
import type { Logger } from 'pino';
import type { DataSource } from 'typeorm';
import { executeRun } from '../network/adjustment.service';
import { runResultJob } from '../results/result-worker';
import { ADJUSTMENT_QUEUE, RESULT_QUEUE, startBoss, type AdjustmentJob, type ResultJob } from './queue';

// The worker: takes 'adjustment-run' jobs (progress into the run row) and 'result-compute' jobs (progress into
// result_request) from the queue and executes them.
// `npm start` runs one inside the server process (server/index.ts). More workers, on this or other machines, run
//   DATABASE_URL=postgres://… npx tsx server/jobs/worker.ts
// against the same database; pg-boss hands each job to exactly one of them.

export type Worker = { stop: () => Promise<void> };

export async function startWorker(opts: { dataSource: DataSource; databaseUrl: string; logger?: Logger; pollingIntervalSeconds?: number }): Promise<Worker> {
  const boss = await startBoss(opts.databaseUrl);
  await boss.work<AdjustmentJob>(ADJUSTMENT_QUEUE, { pollingIntervalSeconds: opts.pollingIntervalSeconds ?? 0.5, batchSize: 1 }, async (jobs) => {
    for (const job of jobs) {
      opts.logger?.info({ runId: job.data.runId }, 'adjustment run started');
      await executeRun(opts.dataSource, job.data.runId);
      opts.logger?.info({ runId: job.data.runId }, 'adjustment run finished');
    }
  });
  await boss.work<ResultJob>(RESULT_QUEUE, { pollingIntervalSeconds: opts.pollingIntervalSeconds ?? 0.5, batchSize: 1 }, async (jobs) => {
    for (const job of jobs) {
      opts.logger?.info({ campaignId: job.data.campaignId }, 'result computation started');
      await runResultJob(opts.dataSource, job.id, job.data);
      opts.logger?.info({ campaignId: job.data.campaignId }, 'result computation finished');
    }
  });
  return { stop: () => boss.stop({ graceful: false, wait: true }) };
}

async function main() {
  const { loadConfig } = await import('../config');
  const { openDatabase } = await import('../db/data-source');
  const { createLogger } = await import('../logger');
  const config = loadConfig();
  const logger = createLogger(config.logLevel);
  const dataSource = await openDatabase(config.databaseUrl);
  const worker = await startWorker({ dataSource, databaseUrl: config.databaseUrl, logger });
  logger.info('adjustment worker waiting for jobs');
  const stop = async () => {
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
