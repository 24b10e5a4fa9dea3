import crypto from 'node:crypto';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import type pg from 'pg';
import { from as copyFrom } from 'pg-copy-streams';
import { faultPoint } from '../dev/fault-point';
import { COPY_BINARY_HEADER, finishCopy } from './ingest';

// The raw file kept in ratio_series_file by COPY in the upload's own transaction, after the samples: the way when no
// second connection is at hand (the demo seeder, or a pool with every connection busy; otherwise raw-file-stream.ts
// writes it alongside the samples). While the rows stream into their COPY (which occupies the connection), the raw
// bytes go to a temporary file that is unlinked at once: the open descriptor is its only name, so even a killed
// process leaves no file.
export const PART_BYTES = 1 << 20;
export const COPY_FILE_SQL = 'COPY ratio_series_file (series_id, part, bytes) FROM STDIN (FORMAT binary)';

/** Writes the head of one binary COPY row of ratio_series_file (3 fields: series_id, part, n bytes) into `row`. */
export function writePartHead(row: Buffer, uuid: Buffer, part: number, n: number): void {
  row.writeInt16BE(3, 0);
  row.writeInt32BE(16, 2);
  uuid.copy(row, 6);
  row.writeInt32BE(4, 22);
  row.writeInt32BE(part, 26);
  row.writeInt32BE(n, 30);
}

export type Spool = { write(chunk: Buffer): void; size(): number; copyInto(client: pg.ClientBase, seriesId: string): Promise<number>; close(): void };

export function openSpool(): Spool {
  const file = path.join(os.tmpdir(), `chronolevel-upload-${crypto.randomUUID()}`);
  const fd = fs.openSync(file, 'w+', 0o600);
  fs.unlinkSync(file);
  let size = 0;
  let closed = false;
  return {
    write(chunk) {
      let done = 0;
      while (done < chunk.length) done += fs.writeSync(fd, chunk, done, chunk.length - done, size + done);
      size += chunk.length;
    },
    size: () => size,
    /** Copies the spooled bytes into ratio_series_file as binary COPY rows of ≤ 1 MiB; returns the number of parts. */
    async copyInto(client, seriesId) {
      const copy = client.query(copyFrom(COPY_FILE_SQL));
      // a lost connection must reject this upload, not crash the process with an unhandled 'error' event
      let failure: Error | null = null;
      copy.on('error', (e: Error) => (failure = e));
      const drained = () => new Promise<void>((resolve, reject) => {
        const onError = (e: Error) => reject(e);
        copy.once('error', onError);
        copy.once('drain', () => {
          copy.off('error', onError);
          resolve();
        });
      });
      const uuid = Buffer.from(seriesId.replace(/-/g, ''), 'hex');
      copy.write(COPY_BINARY_HEADER);
      let part = 0;
      for (let pos = 0; pos < size; part++) {
        const n = Math.min(PART_BYTES, size - pos);
        const row = Buffer.allocUnsafe(2 + 4 + 16 + 4 + 4 + 4 + n);
        writePartHead(row, uuid, part, n);
        let read = 0;
        while (read < n) read += fs.readSync(fd, row, 34 + read, n - read, pos + read);
        pos += n;
        if (failure) throw failure;
        if (!copy.write(row)) await drained();
        if (part === 1) await faultPoint('raw-file-parts');
      }
      await finishCopy(copy);
      return part;
    },
    close() {
      if (!closed) fs.closeSync(fd);
      closed = true;
    },
  };
}
