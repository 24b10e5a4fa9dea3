import PgBoss from 'pg-boss';

// The job queue: pg-boss keeps jobs in PostgreSQL (schema "pgboss", created on first start), so any number of
// worker processes on any machine can share the work by pointing at the same database.

export const ADJUSTMENT_QUEUE = 'adjustment-run';
export type AdjustmentJob = { runId: string };
/** Computes a campaign's comparison result (after an upload, an acceptance or a request to recompute). */
export const RESULT_QUEUE = 'result-compute';
export type ResultJob = { campaignId: string; requestedByUserId: string | null; force: boolean };
/** Renders, time-stamps, signs and stores a certificate asked for over HTTP (table certificate_request). */
export const CERTIFICATE_QUEUE = 'certificate-issue';
export type CertificateJob = { requestId: string };
/** Finds the loops of simultaneous campaigns and computes their ratio closures (after a result, on acceptance). */
export const CLOSURE_QUEUE = 'closure-compute';
export type ClosureJob = { reason: 'result' | 'accept' | 'recompute'; campaignId: string | null };
export const JOB_QUEUES = [ADJUSTMENT_QUEUE, RESULT_QUEUE, CLOSURE_QUEUE, CERTIFICATE_QUEUE];

export async function startBoss(databaseUrl: string, opts: { supervise?: boolean } = {}): Promise<PgBoss> {
  const boss = new PgBoss({ connectionString: databaseUrl, max: 4, supervise: opts.supervise ?? true, schedule: false, application_name: 'chronolevel-jobs' });
  boss.on('error', () => undefined); // transient errors are retried by pg-boss itself; job failures are stored on the run
  await boss.start();
  await boss.createQueue(ADJUSTMENT_QUEUE, { name: ADJUSTMENT_QUEUE, retryLimit: 2, retryDelay: 5, expireInMinutes: 60 });
  await boss.createQueue(RESULT_QUEUE, { name: RESULT_QUEUE, retryLimit: 2, retryDelay: 5, expireInMinutes: 30 });
  await boss.createQueue(CLOSURE_QUEUE, { name: CLOSURE_QUEUE, retryLimit: 2, retryDelay: 5, expireInMinutes: 30 });
  await boss.createQueue(CERTIFICATE_QUEUE, { name: CERTIFICATE_QUEUE, retryLimit: 2, retryDelay: 2, expireInMinutes: 15 });
  return boss;
}

const senders = new Map<string, Promise<PgBoss>>();

/** One sending connection per database, opened on first use by the HTTP process. */
export function queueFor(databaseUrl: string): Promise<PgBoss> {
  let p = senders.get(databaseUrl);
  if (!p) {
    p = startBoss(databaseUrl, { supervise: false });
    p.catch(() => senders.delete(databaseUrl));
    senders.set(databaseUrl, p);
  }
  return p;
}

export async function enqueueAdjustment(databaseUrl: string, runId: string): Promise<void> {
  const boss = await queueFor(databaseUrl);
  await boss.send(ADJUSTMENT_QUEUE, { runId } satisfies AdjustmentJob);
}

/** Closes the sending connection(s); tests call this in teardown so the process can exit. */
export async function stopQueues(): Promise<void> {
  const all = [...senders.values()];
  senders.clear();
  for (const p of all) {
    const boss = await p.catch(() => null);
    await boss?.stop({ graceful: false, wait: true });
  }
}
