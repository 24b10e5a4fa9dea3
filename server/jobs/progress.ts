import type { DataSource, EntityManager } from 'typeorm';

// Durable job progress (table job_progress): the stage a job reached and the fraction done, one row per job kind
// and subject (a campaign for results, a certificate request for certificates). Workers write it with the data
// source's own connections, outside the job's transaction, so every HTTP process sees it while the job runs.

export type JobKind = 'result-compute' | 'certificate-issue' | 'adjustment-run';
export type JobProgressRow = { stage: string; fraction: number; updated_at: Date; error: string | null };

type Runner = Pick<DataSource | EntityManager, 'query'>;

/** Records the stage (upsert); fraction is clamped to [0, 1]. Never lowers an error already recorded to none. */
export async function writeProgress(db: Runner, kind: JobKind, subjectId: string, stage: string, fraction: number, error: string | null = null): Promise<void> {
  const f = Math.min(1, Math.max(0, Number.isFinite(fraction) ? fraction : 0));
  await db.query(
    `INSERT INTO job_progress (kind, subject_id, stage, fraction, updated_at, error) VALUES ($1, $2, $3, $4, now(), $5)
     ON CONFLICT (kind, subject_id) DO UPDATE SET stage = EXCLUDED.stage, fraction = EXCLUDED.fraction, updated_at = EXCLUDED.updated_at, error = EXCLUDED.error`,
    [kind, subjectId, stage, f, error],
  );
}

export async function readProgress(db: Runner, kind: JobKind, subjectId: string): Promise<JobProgressRow | null> {
  const rows: JobProgressRow[] = await db.query('SELECT stage, fraction, updated_at, error FROM job_progress WHERE kind = $1 AND subject_id = $2', [kind, subjectId]);
  return rows[0] ?? null;
}

/** A progress callback for a job that writes durable progress (errors writing progress never fail the job). */
export function progressWriter(db: Runner, kind: JobKind, subjectId: string) {
  return async (stage: string, fraction: number) => {
    await writeProgress(db, kind, subjectId, stage, fraction).catch(() => undefined);
  };
}

/**
 * Progress from a computation that reports far more often than it should be written: writes at most one report per
 * `intervalMs` (the newest one), one write at a time, and `flush` writes the last report before it resolves.
 */
export function throttledProgress(write: (fraction: number, stage: string) => Promise<void>, intervalMs = 300) {
  let pending: { fraction: number; stage: string } | null = null;
  let inFlight: Promise<void> | null = null;
  let timer: NodeJS.Timeout | null = null;
  let last = 0;
  const pump = () => {
    if (inFlight || !pending) return;
    const { fraction, stage } = pending;
    pending = null;
    last = Date.now();
    inFlight = write(fraction, stage).catch(() => undefined).finally(() => {
      inFlight = null;
      schedule();
    });
  };
  const schedule = () => {
    if (!pending || inFlight || timer) return;
    timer = setTimeout(() => {
      timer = null;
      pump();
    }, Math.max(0, last + intervalMs - Date.now()));
  };
  return {
    report(fraction: number, stage: string) {
      pending = { fraction, stage };
      schedule();
    },
    async flush() {
      if (timer) clearTimeout(timer);
      timer = null;
      while (inFlight || pending) {
        if (inFlight) await inFlight;
        else pump();
      }
    },
  };
}
