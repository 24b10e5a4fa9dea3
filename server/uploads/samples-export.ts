import { Readable, Writable } from 'node:stream';
import type { Response } from 'express';
import type pg from 'pg';
import { to as copyTo } from 'pg-copy-streams';
import type { DataSource } from 'typeorm';
import { columnMappingSchema } from '../../shared/uploads';
import { ingestRatioSeries } from './ingest';

// Export of an upload's stored samples as CSV: line, epoch and value exactly as written in the uploaded file (the raw
// file is kept in ratio_series_file and read again with the stored column mapping), beside the stored MJD and y
// (float64, written as the shortest decimal that reads back to the same bits) and the valid flag. The stored samples
// come in file order (epochs strictly increase); their count and order are checked against the raw file.

export type ExportableSeries = { id: string; fileName: string; rowCount: number; mapping: Record<string, unknown>; referenceRatio: string };

/** Shortest round-trip decimal of a float64 (ECMAScript Number::toString), keeping the sign of zero. */
export const float64Text = (v: number) => (Object.is(v, -0) ? '-0' : String(v));

const SAMPLE_ROW_BYTES = 2 + 4 + 8 + 4 + 8 + 4 + 1;

/** Reads the stored samples of a series (binary COPY, ordered by epoch) into typed arrays. */
async function readSamples(client: pg.PoolClient, seriesId: string, rowCount: number) {
  const mjd = new Float64Array(rowCount);
  const y = new Float64Array(rowCount);
  const valid = new Uint8Array(rowCount);
  // the id was validated as a UUID by the route; COPY takes no parameters
  if (!/^[0-9a-f-]{36}$/i.test(seriesId)) throw new Error('series id is not a UUID');
  const stream = client.query(copyTo(`COPY (SELECT mjd, y, valid FROM ratio_sample WHERE series_id = '${seriesId}' ORDER BY mjd) TO STDOUT (FORMAT binary)`));
  let carry = Buffer.alloc(0);
  let headerLeft = 19; // signature 11 + flags 4 + extension length 4 (no extension written by PostgreSQL)
  let n = 0;
  for await (const chunk of stream as AsyncIterable<Buffer>) {
    let buf = carry.length ? Buffer.concat([carry, chunk]) : chunk;
    if (headerLeft > 0) {
      const skip = Math.min(headerLeft, buf.length);
      buf = buf.subarray(skip);
      headerLeft -= skip;
    }
    let off = 0;
    while (buf.length - off >= 2) {
      const fields = buf.readInt16BE(off);
      if (fields === -1) { off += 2; continue; } // trailer
      if (buf.length - off < SAMPLE_ROW_BYTES) break;
      if (n >= rowCount) throw new Error(`series ${seriesId} holds more samples than its row count ${rowCount}`);
      mjd[n] = buf.readDoubleBE(off + 6);
      y[n] = buf.readDoubleBE(off + 18);
      valid[n] = buf[off + 30];
      n++;
      off += SAMPLE_ROW_BYTES;
    }
    carry = Buffer.from(buf.subarray(off));
  }
  if (n !== rowCount) throw new Error(`series ${seriesId} holds ${n} samples, its row count says ${rowCount}`);
  return { mjd, y, valid };
}

/** The raw file of a series, part by part (≤ 1 MiB each); parts are found only through their series (raw-file-stream.ts). */
function rawFile(client: pg.PoolClient, seriesId: string): Readable {
  let part = 0;
  return new Readable({
    async read() {
      try {
        const { rows } = await client.query<{ bytes: Buffer }>('SELECT f.bytes FROM ratio_series_file f JOIN ratio_series s ON s.id = f.series_id WHERE f.series_id = $1 AND f.part = $2', [seriesId, part++]);
        this.push(rows[0] ? rows[0].bytes : null);
      } catch (e) {
        this.destroy(e as Error);
      }
    },
  });
}

const csvCell = (text: string) => (/[",\r\n]/.test(text) ? `"${text.replaceAll('"', '""')}"` : text);

export async function exportSamplesCsv(dataSource: DataSource, s: ExportableSeries, res: Response): Promise<void> {
  const mapping = columnMappingSchema.parse(s.mapping);
  const qr = dataSource.createQueryRunner();
  await qr.connect();
  const client = (qr as unknown as { databaseConnection: pg.PoolClient }).databaseConnection;
  try {
    // one snapshot for samples and raw file
    await qr.startTransaction('REPEATABLE READ');
    const stored = await readSamples(client, s.id, s.rowCount);
    res.status(200).type('text/csv; charset=utf-8');
    res.setHeader('Content-Disposition', `attachment; filename="${s.fileName.replace(/[^\w.-]+/g, '_').replace(/\.csv$/i, '')}-samples.csv"`);
    const valueName = mapping.valueKind === 'ratio' ? 'ratio' : 'offset';
    res.write(`# samples of upload ${s.id}: epoch and ${valueName} as written in the uploaded file; mjd and y as stored (float64, shortest exact decimal)\n`);
    res.write(`line,epoch,${valueName},mjd,y,valid\n`);
    let i = 0;
    let out = '';
    let mismatch: string | null = null;
    // The re-read raw file drives the output; the "COPY sink" only carries the back-pressure of the response.
    const sink = new Writable({
      write(_chunk, _enc, cb) {
        if (out.length === 0) return cb();
        const ok = res.write(out);
        out = '';
        if (ok) cb();
        else res.once('drain', () => cb());
      },
    });
    await ingestRatioSeries(rawFile(client, s.id), sink, {
      seriesId: s.id, mapping, referenceRatio: s.referenceRatio, periodStartMjd: null, periodEndMjd: null,
      onRow: (r) => {
        if (i >= s.rowCount || stored.mjd[i] !== r.mjd) mismatch ??= `line ${r.line} does not match stored sample ${i + 1}`;
        const k = Math.min(i, s.rowCount - 1);
        out += `${r.line},${csvCell(r.epochText)},${csvCell(r.valueText)},${float64Text(stored.mjd[k])},${float64Text(stored.y[k])},${stored.valid[k] ? 1 : 0}\n`;
        i++;
        if (out.length > 1 << 20) {
          res.write(out);
          out = '';
        }
      },
    });
    if (i !== s.rowCount) mismatch ??= `the raw file holds ${i} rows, the stored series ${s.rowCount}`;
    res.write(out);
    if (mismatch) res.write(`# INCOMPLETE: ${mismatch}; do not use this export\n`);
    await qr.commitTransaction();
    res.end();
  } catch (e) {
    if (qr.isTransactionActive) await qr.rollbackTransaction().catch(() => undefined);
    if (res.headersSent) res.destroy(e as Error);
    else throw e;
  } finally {
    await qr.release();
  }
}
