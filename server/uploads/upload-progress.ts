import type { DataSource } from 'typeorm';
import type { UploadProgress } from '../../shared/uploads';

// Progress of uploads in flight, keyed by an id the client chooses, kept in PostgreSQL (table upload_progress) so
// that any HTTP process behind a load balancer answers the polling requests, whichever one receives the upload.
// Writes go through the pool, outside the upload's own transaction (which commits or vanishes as a whole), at most
// every WRITE_EVERY_MS per upload and at every phase change; one write per upload is in flight at a time, newest
// state wins. Rows older than KEEP are removed when a new upload starts.
const WRITE_EVERY_MS = 200;
const KEEP = '10 minutes';

type Pending = { state: UploadProgress; userId: string; lastWrite: number; writing: Promise<void> | null; dirty: boolean };

export function createUploadProgressStore(dataSource: DataSource) {
  const inFlight = new Map<string, Pending>();

  async function write(p: Pending) {
    const s = p.state;
    p.dirty = false;
    p.lastWrite = Date.now();
    await dataSource.query(
      `INSERT INTO upload_progress (upload_id, user_id, phase, bytes_read, bytes_expected, rows_processed, series_id, updated_at)
       VALUES ($1, $2, $3, $4, $5, $6, $7, now())
       ON CONFLICT (upload_id) DO UPDATE SET phase = EXCLUDED.phase, bytes_read = EXCLUDED.bytes_read, bytes_expected = EXCLUDED.bytes_expected,
         rows_processed = EXCLUDED.rows_processed, series_id = EXCLUDED.series_id, updated_at = now()
       WHERE upload_progress.user_id = EXCLUDED.user_id`,
      [s.uploadId, p.userId, s.phase, s.bytesRead, s.bytesExpected, s.rowsProcessed, s.seriesId],
    );
  }

  /** Writes now when due (or forced), else leaves it to the next update; never two writes of one upload at once. */
  function flush(p: Pending, force: boolean) {
    if (!p.dirty || p.writing) return p.writing ?? Promise.resolve();
    if (!force && Date.now() - p.lastWrite < WRITE_EVERY_MS) return Promise.resolve();
    p.writing = write(p)
      .catch(() => undefined) // progress is advisory: a failed write must never fail the upload itself
      .finally(() => {
        p.writing = null;
        if (p.dirty && (force || ['done', 'failed'].includes(p.state.phase))) void flush(p, true);
      });
    return p.writing;
  }

  return {
    async start(uploadId: string, userId: string, bytesExpected: number | null) {
      await dataSource.query(`DELETE FROM upload_progress WHERE updated_at < now() - interval '${KEEP}'`);
      const p: Pending = { state: { uploadId, phase: 'receiving', bytesRead: 0, bytesExpected, rowsProcessed: 0, seriesId: null }, userId, lastWrite: 0, writing: null, dirty: true };
      inFlight.set(uploadId, p);
      await flush(p, true);
    },
    update(uploadId: string | undefined, patch: Partial<UploadProgress>) {
      if (!uploadId) return;
      const p = inFlight.get(uploadId);
      if (!p) return;
      const phaseChanged = patch.phase !== undefined && patch.phase !== p.state.phase;
      Object.assign(p.state, patch);
      p.dirty = true;
      void flush(p, phaseChanged);
    },
    /** The final state is written before the upload's answer goes out, so a poll after it never sees an older phase. */
    async finish(uploadId: string | undefined, patch: Partial<UploadProgress>) {
      if (!uploadId) return;
      const p = inFlight.get(uploadId);
      if (!p) return;
      Object.assign(p.state, patch);
      p.dirty = true;
      while (p.writing) await p.writing;
      await flush(p, true);
      inFlight.delete(uploadId);
    },
    /** Only the person who uploads sees the progress of that upload. */
    async get(uploadId: string, userId: string): Promise<UploadProgress | null> {
      const [r] = await dataSource.query(
        `SELECT upload_id, phase, bytes_read, bytes_expected, rows_processed, series_id FROM upload_progress WHERE upload_id = $1 AND user_id = $2`,
        [uploadId, userId],
      );
      if (!r) return null;
      return { uploadId: r.upload_id, phase: r.phase, bytesRead: Number(r.bytes_read), bytesExpected: r.bytes_expected === null ? null : Number(r.bytes_expected), rowsProcessed: Number(r.rows_processed), seriesId: r.series_id };
    },
  };
}
