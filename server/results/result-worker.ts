import type { DataSource } from 'typeorm';
import { AppError } from '../http/errors';
import { progressWriter, writeProgress } from '../jobs/progress';
import type { ResultJob } from '../jobs/queue';
import { findActorByUserId } from '../users/users.service';
import { computeCampaignResult } from './results.service';

// The worker's side of result computation (server/results/result-requests.ts enqueues). Progress goes into
// result_request, guarded by the job id so a job overtaken by a newer request leaves the row to the newer one.

/** Runs one job: marks the request running, computes in one transaction, marks it done or failed (with the reason). */
export async function runResultJob(dataSource: DataSource, jobId: string, job: ResultJob): Promise<void> {
  const mine = async (sql: string, values: unknown[]) => dataSource.query(`${sql} WHERE campaign_id = $1 AND job_id = $2`, [job.campaignId, jobId, ...values]);
  await mine("UPDATE result_request SET state = 'running', started_at = now()", []);
  const stage = progressWriter(dataSource, 'result-compute', job.campaignId);
  await stage('starting', 0.02);
  const actor = job.requestedByUserId ? await findActorByUserId(dataSource, job.requestedByUserId) : null;
  try {
    const result = await dataSource.transaction((m) => computeCampaignResult(m, job.campaignId, { actor, now: new Date(), force: job.force, onStage: stage }));
    await mine("UPDATE result_request SET state = 'done', finished_at = now(), result_id = $3", [result.id]);
    await stage('finished', 1);
  } catch (e) {
    // Data that yields no result (no series, a science input error) fails for good: retrying cannot help.
    const final = e instanceof AppError;
    const message = final ? e.message : `the computation failed (${(e as Error).message}); it is tried again automatically`;
    await mine("UPDATE result_request SET state = 'failed', finished_at = now(), error = $3", [message]);
    await writeProgress(dataSource, 'result-compute', job.campaignId, final ? 'failed' : 'waiting to be retried', 0, message).catch(() => undefined);
    if (!final) throw e;
  }
}
