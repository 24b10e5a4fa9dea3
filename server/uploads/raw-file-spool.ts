import crypto from 'node:crypto';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import type pg from 'pg';

// The raw file is kept as a PostgreSQL large object written in the upload's transaction, so a rejected or
// interrupted upload leaves nothing behind. While the rows stream into COPY (which occupies the connection), the
// raw bytes go to a temporary file that is unlinked at once: the open descriptor is its only name, so even a
// killed process leaves no file.
const LO_CHUNK = 4 << 20;

export type Spool = { write(chunk: Buffer): void; size(): number; toLargeObject(client: pg.ClientBase): Promise<number>; close(): void };

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
    async toLargeObject(client) {
      const { rows } = await client.query<{ oid: number }>('SELECT lo_create(0) AS oid');
      const oid = Number(rows[0].oid);
      const buf = Buffer.allocUnsafe(Math.min(LO_CHUNK, Math.max(size, 1)));
      for (let pos = 0; pos < size; ) {
        const n = fs.readSync(fd, buf, 0, Math.min(buf.length, size - pos), pos);
        await client.query('SELECT lo_put($1::oid, $2::bigint, $3::bytea)', [oid, pos, buf.subarray(0, n)]);
        pos += n;
      }
      return oid;
    },
    close() {
      if (!closed) fs.closeSync(fd);
      closed = true;
    },
  };
}
