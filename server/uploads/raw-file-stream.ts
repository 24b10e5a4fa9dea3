import crypto from 'node:crypto';
import type pg from 'pg';
import { from as copyFrom } from 'pg-copy-streams';
import type { DataSource } from 'typeorm';
import { faultPoint } from '../dev/fault-point';
import { poolOf } from '../db/pool-stats';
import { COPY_BINARY_HEADER, finishCopy } from './ingest';
import { COPY_FILE_SQL, PART_BYTES, writePartHead } from './raw-file-spool';

// The raw file of an upload, written on a second connection while the samples' COPY occupies the upload's own: the
// bytes go into ratio_series_file (COPY, parts of ≤ 1 MiB) as they arrive, in a transaction of that second
// connection. One transaction cannot span two connections, so the two commit one after the other:
//  - a rejected, failed or aborted upload rolls both back (nothing stored); a killed process or PostgreSQL loses
//    both open transactions;
//  - on success the raw file commits first, then the upload's transaction with the series row. Until then the parts
//    are invisible: every reader finds them through their series. If the upload's commit never comes (the process
//    or PostgreSQL stops between the two commits, or that commit fails), the parts stay as orphans without a
//    series; `sweepRawFileOrphans` (housekeeping) removes them. The upload's transaction holds an advisory lock on
//    its series id from before the raw file can commit, so the sweep never takes the parts of an upload still on
//    its way to commit.

/** First key of the two-key advisory lock an upload in progress holds on its series id: 'rf'. */
export const RAW_FILE_LOCK_CLASS = 0x7266;

/** Takes, in the upload's transaction on `client`, the lock that keeps the sweep off this series' parts until it ends. */
export async function lockRawFile(client: pg.ClientBase, seriesId: string): Promise<void> {
  await client.query('SELECT pg_advisory_xact_lock($1, hashtext($2))', [RAW_FILE_LOCK_CLASS, seriesId]);
}

export type RawFileSession = {
  /** The id the upload's series will have (its lock is held by the upload's transaction). */
  seriesId: string;
  /** Starts the COPY of the series' parts. */
  start(): void;
  /** Takes the next bytes of the file (kept until a part is full). */
  write(chunk: Buffer): void;
  /** A promise while the caller should wait (PostgreSQL is behind, or a test pause); throws once the COPY failed. */
  ready(): Promise<void> | undefined;
  /** Sends the last part and ends the COPY; the number of parts. */
  finish(): Promise<number>;
  /** Commits the parts (call right before the upload's own commit). */
  commit(): Promise<void>;
  /** Cancels the COPY if it still runs and rolls back; never throws. */
  rollback(): Promise<void>;
  /** Gives the connection back (broken ones are discarded). */
  release(): void;
};

/**
 * A second connection from the pool, in its own transaction, for the raw file of the upload whose transaction runs on
 * `uploadClient` (which takes the series' lock here); null when the pool gives none within `waitMs` (every
 * connection busy: the upload then keeps its raw file on its own connection, after the samples, so a full pool can
 * never deadlock uploads that each wait for a second connection).
 */
export async function openRawFileSession(
  dataSource: DataSource, uploadClient: pg.ClientBase, opts: { statementTimeoutMs: number; waitMs: number },
): Promise<RawFileSession | null> {
  const pool = poolOf(dataSource);
  if (!pool) return null;
  const pending = pool.connect();
  let timer: NodeJS.Timeout | undefined;
  const client = await Promise.race([
    pending,
    new Promise<null>((resolve) => (timer = setTimeout(() => resolve(null), opts.waitMs))),
  ]).catch(() => null);
  clearTimeout(timer);
  if (!client) {
    pending.then((c) => c.release(), () => undefined);
    return null;
  }
  // a checked-out client has no listener of the pool's: a connection lost now must fail the upload, not the process
  let broken: Error | null = null;
  const onError = (e: Error) => (broken ??= e);
  client.on('error', onError);
  try {
    await client.query('BEGIN');
    await client.query(`SET LOCAL statement_timeout = ${Math.trunc(opts.statementTimeoutMs)}`);
  } catch {
    client.off('error', onError);
    client.release(true);
    return null;
  }
  const seriesId = crypto.randomUUID();
  try {
    // held until the upload's transaction ends: the parts, committed just before it, are not swept meanwhile
    await lockRawFile(uploadClient, seriesId);
  } catch (e) {
    await client.query('ROLLBACK').catch(() => undefined);
    client.off('error', onError);
    client.release();
    throw e;
  }

  let copy: ReturnType<typeof copyFrom> | null = null;
  let failure: Error | null = null;
  const uuid = Buffer.from(seriesId.replace(/-/g, ''), 'hex');
  let part = 0;
  let row = Buffer.allocUnsafe(34 + PART_BYTES);
  let fill = 0;
  let full = false;
  let faultDue = false;
  let ended = false;
  let inTransaction = true;
  let released = false;

  const sendPart = () => {
    writePartHead(row, uuid, part, fill);
    if (!copy!.write(fill === PART_BYTES ? row : row.subarray(0, 34 + fill))) full = true;
    if (part === 1) faultDue = true;
    part++;
    row = Buffer.allocUnsafe(34 + PART_BYTES);
    fill = 0;
  };

  return {
    seriesId,
    start() {
      copy = client.query(copyFrom(COPY_FILE_SQL));
      copy.on('error', (e: Error) => (failure ??= e));
      copy.write(COPY_BINARY_HEADER);
    },
    write(chunk) {
      if (failure || !copy) return;
      for (let done = 0; done < chunk.length;) {
        const n = Math.min(PART_BYTES - fill, chunk.length - done);
        chunk.copy(row, 34 + fill, done, done + n);
        fill += n;
        done += n;
        if (fill === PART_BYTES) sendPart();
      }
    },
    ready() {
      const fault = failure ?? broken;
      if (fault) throw fault;
      if (!full && !faultDue) return undefined;
      const waiting = (async () => {
        if (full) {
          full = false;
          await new Promise<void>((resolve, reject) => {
            const onFail = (e: Error) => reject(e);
            copy!.once('error', onFail);
            copy!.once('drain', () => {
              copy!.off('error', onFail);
              resolve();
            });
          });
        }
        if (faultDue) {
          faultDue = false;
          // the kill harness stops here once two parts are in the COPY (no-op unless armed)
          await faultPoint('raw-file-parts');
        }
      })();
      // the ingest does not wait on its last progress report: a failure seen only there is no unhandled rejection
      // (the COPY's end reports it)
      waiting.catch(() => undefined);
      return waiting;
    },
    async finish() {
      if (failure) throw failure;
      if (fill > 0) sendPart();
      ended = true;
      await finishCopy(copy!);
      return part;
    },
    async commit() {
      await client.query('COMMIT');
      inTransaction = false;
    },
    async rollback() {
      if (copy && !ended && !failure) copy.destroy(new Error('the upload did not complete'));
      if (!inTransaction) return;
      inTransaction = false;
      await client.query('ROLLBACK').catch((e: Error) => (broken ??= e));
    },
    release() {
      if (released) return;
      released = true;
      client.off('error', onError);
      // a connection still in a transaction (a rollback that could not be sent) or with an error is not reused
      client.release(broken ?? (inTransaction ? new Error('raw file transaction left open') : undefined));
    },
  };
}

/**
 * Removes raw-file parts whose series does not exist and whose upload no longer runs (its lock is free): left by
 * an upload stopped between its two commits. Safe to run in every process at once. Returns the parts removed.
 */
export async function sweepRawFileOrphans(dataSource: DataSource): Promise<number> {
  return dataSource.transaction(async (m) => {
    const candidates = (await m.query(
      'SELECT DISTINCT f.series_id AS id FROM ratio_series_file f WHERE NOT EXISTS (SELECT 1 FROM ratio_series s WHERE s.id = f.series_id)',
    )) as { id: string }[];
    if (candidates.length === 0) return 0;
    const free = (await m.query(
      'SELECT id FROM unnest($1::uuid[]) AS id WHERE pg_try_advisory_xact_lock($2, hashtext(id::text))',
      [candidates.map((c) => c.id), RAW_FILE_LOCK_CLASS],
    )) as { id: string }[];
    if (free.length === 0) return 0;
    // a new statement, so a new snapshot taken after the locks: an upload that committed meanwhile has its series seen
    const [, removed] = (await m.query(
      'DELETE FROM ratio_series_file f WHERE f.series_id = ANY($1::uuid[]) AND NOT EXISTS (SELECT 1 FROM ratio_series s WHERE s.id = f.series_id)',
      [free.map((c) => c.id)],
    )) as [unknown, number];
    return removed;
  });
}
