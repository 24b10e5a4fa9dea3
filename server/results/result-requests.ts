import type { EntityManager } from 'typeorm';
import type { Actor } from '../auth/actor';
import { writeProgress } from '../jobs/progress';
import { queueFor, RESULT_QUEUE, type ResultJob } from '../jobs/queue';

// Results are computed by a job, never by a read. An upload, an acceptance or a request to recompute (all POSTs)
// records the request in result_request and puts a job on the queue in the same transaction, so a committed
// request always has its job and a rolled-back one has none. The worker computes, stores and audits the result.

export type ResultRequestReason = 'upload' | 'accept' | 'recompute';
export type ResultRequestState = 'queued' | 'running' | 'done' | 'failed';
export type ResultRequestRow = { state: ResultRequestState; reason: ResultRequestReason; requested_at: Date; started_at: Date | null; finished_at: Date | null; error: string | null };

/** Records the request and enqueues the job inside the caller's transaction (`manager`). */
export async function requestResultComputation(manager: EntityManager, databaseUrl: string, actor: Actor | null, campaignId: string, reason: ResultRequestReason) {
  const boss = await queueFor(databaseUrl);
  const job: ResultJob = { campaignId, requestedByUserId: actor?.userId ?? null, force: reason === 'recompute' };
  const jobId = await boss.send(RESULT_QUEUE, job, {
    db: { executeSql: async (text: string, values: unknown[]) => ({ rows: (await manager.query(text, values)) as unknown[] }) },
  });
  const [row]: { requested_at: Date }[] = await manager.query(
    `INSERT INTO result_request (campaign_id, job_id, reason, state, requested_by, requested_at, started_at, finished_at, result_id, error)
     VALUES ($1, $2, $3, 'queued', $4, now(), NULL, NULL, NULL, NULL)
     ON CONFLICT (campaign_id) DO UPDATE SET job_id = EXCLUDED.job_id, reason = EXCLUDED.reason, state = 'queued', requested_by = EXCLUDED.requested_by,
       requested_at = EXCLUDED.requested_at, started_at = NULL, finished_at = NULL, result_id = NULL, error = NULL
     RETURNING requested_at`,
    [campaignId, jobId, reason, actor?.userId ?? null],
  );
  await writeProgress(manager, 'result-compute', campaignId, 'waiting for a worker', 0);
  return { campaignId, state: 'queued' as const, reason, requestedAt: row.requested_at.toISOString() };
}

export async function readResultRequest(manager: EntityManager, campaignId: string): Promise<ResultRequestRow | null> {
  const rows: ResultRequestRow[] = await manager.query('SELECT state, reason, requested_at, started_at, finished_at, error FROM result_request WHERE campaign_id = $1', [campaignId]);
  return rows[0] ?? null;
}
