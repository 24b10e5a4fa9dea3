import crypto from 'node:crypto';
import { Readable, Writable } from 'node:stream';
import { describe, expect, it } from 'vitest';
import { finishCopy, ingestRatioSeries } from '../../../server/uploads/ingest';
import type { ColumnMapping } from '../../../shared/uploads';

// The streaming ingest must not depend on where the network cuts the bytes: a file split into tiny chunks (through
// CRLF pairs, multi-byte UTF-8 characters and BOM) gives the same rows, the same COPY bytes and the same SHA-256
// (node:crypto on the whole file as the reference) as the file in one piece.
const mapping: ColumnMapping = { epochColumn: 1, epochKind: 'iso', valueColumn: 3, valueKind: 'offset', flagColumn: 2 };

async function run(chunks: Buffer[]) {
  const parts: Buffer[] = [];
  const sink = new Writable({ write(c, _e, cb) { parts.push(c as Buffer); cb(); } });
  const summary = await ingestRatioSeries(Readable.from(chunks), sink, {
    seriesId: '00000000-0000-4000-8000-000000000001', mapping, referenceRatio: '1', periodStartMjd: 61000, periodEndMjd: 62000,
  });
  await finishCopy(sink);
  return { summary, copy: Buffer.concat(parts) };
}

describe('ingestRatioSeries across chunk boundaries', () => {
  const text = '\uFEFF# Zeitreihe – Prüfdatei, erfunden (°, µ, ✓)\r\nzeit;gültig;y\r\n'
    + Array.from({ length: 300 }, (_, i) => `2026-03-01T00:${String(Math.floor(i / 60)).padStart(2, '0')}:${String(i % 60).padStart(2, '0')}.5Z;${i % 7 ? 'valid' : 'invalid'};${(i * 1e-18).toExponential(3)}\r\n`).join('')
    + '# trailing comment ✓\r\n';
  const file = Buffer.from(text, 'utf8');

  it('gives the same rows, COPY bytes and SHA-256 for 1-to-7-byte chunks as for one chunk', async () => {
    const whole = await run([file]);
    const pieces: Buffer[] = [];
    for (let pos = 0, k = 0; pos < file.length; k++) {
      const n = 1 + (k % 7);
      pieces.push(file.subarray(pos, pos + n));
      pos += n;
    }
    const split = await run(pieces);
    expect(whole.summary.issues).toEqual([]);
    expect(whole.summary).toMatchObject({ rowCount: 300, validCount: 300 - 43, delimiter: ';', hasHeader: true, header: ['zeit', 'gültig', 'y'], tau0Seconds: 1 });
    expect(whole.summary.sha256).toBe(crypto.createHash('sha256').update(file).digest('hex'));
    expect(split.summary).toEqual(whole.summary);
    expect(split.copy.equals(whole.copy)).toBe(true);
    // 19-byte binary COPY header, 51 bytes per row, 2-byte trailer (PostgreSQL docs, COPY binary format)
    expect(whole.copy.length).toBe(19 + 300 * 51 + 2);
  });

  it('names the line of a bad value however the bytes arrive', async () => {
    const bad = Buffer.from(text.replace('2026-03-01T00:02:00.5Z;valid;1.200e-16', '2026-03-01T00:02:00.5Z;valid;1.2e-16x'), 'utf8');
    const pieces = Array.from({ length: Math.ceil(bad.length / 5) }, (_, k) => bad.subarray(k * 5, k * 5 + 5));
    const r = await run(pieces);
    // line 1 comment, line 2 header, sample i on line i + 3: i = 120
    expect(r.summary.issues[0]).toMatchObject({ line: 123, column: '3' });
  });
});
