import type { UploadProgress } from '../../shared/uploads';

// Progress of uploads in flight, keyed by an id the client chooses, kept in this process's memory: the upload
// request and the polling requests reach the same process (one process, or sticky sessions behind a balancer).
type Entry = UploadProgress & { userId: string; updatedAt: number };

const KEEP_MS = 10 * 60 * 1000;
const entries = new Map<string, Entry>();

function sweep(now: number) {
  for (const [k, e] of entries) if (now - e.updatedAt > KEEP_MS) entries.delete(k);
}

export const uploadProgress = {
  start(uploadId: string, userId: string, bytesExpected: number | null) {
    const now = Date.now();
    sweep(now);
    entries.set(uploadId, { uploadId, userId, phase: 'receiving', bytesRead: 0, bytesExpected, rowsProcessed: 0, seriesId: null, updatedAt: now });
  },
  update(uploadId: string | undefined, patch: Partial<UploadProgress>) {
    if (!uploadId) return;
    const e = entries.get(uploadId);
    if (e) Object.assign(e, patch, { updatedAt: Date.now() });
  },
  /** Only the person who uploads sees the progress of that upload. */
  get(uploadId: string, userId: string): UploadProgress | null {
    const e = entries.get(uploadId);
    if (!e || e.userId !== userId) return null;
    return { uploadId: e.uploadId, phase: e.phase, bytesRead: e.bytesRead, bytesExpected: e.bytesExpected, rowsProcessed: e.rowsProcessed, seriesId: e.seriesId };
  },
};
