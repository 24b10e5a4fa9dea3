import Decimal from 'decimal.js';
import { Readable, Writable } from 'node:stream';
import { describe, expect, it } from 'vitest';
import { finishCopy, ingestRatioSeries, type IngestSummary } from '../../../server/uploads/ingest';
import type { ColumnMapping } from '../../../shared/uploads';

// Usual data lines of ASCII chunks are read straight from the bytes; every other line goes the general way (split
// into strings). The two must give the same file outcome: the same rows, COPY bytes, counts, overview and the same
// messages with the same line and column. Asking for every row's cells (`onRow`) turns the byte reading off, so each
// random file below is read both ways, cut into chunks in several ways, and compared. The values themselves are
// checked against references outside the module: the MJD against ECMAScript's Number(), which reads a decimal
// correctly rounded (ECMA-262, §7.1.4.1.1 StringToNumber; IEEE 754-2019 §5.12.2), and y = R/R0 − 1 against
// decimal.js at 60 digits rounded once.

const D = Decimal.clone({ precision: 60 });
const ulp = (x: number) => (x === 0 ? Number.MIN_VALUE : 2 ** (Math.floor(Math.log2(Math.abs(x))) - 52));

type FileCase = { text: string; mapping: ColumnMapping; referenceRatio: string; period: [number | null, number | null] };

function makeRandom(seed: number) {
  let s = seed;
  return () => (s = (s * 16807) % 2147483647) / 2147483647;
}

function randomFile(seed: number): FileCase {
  const rnd = makeRandom(seed);
  const pick = <T,>(xs: readonly T[]) => xs[Math.floor(rnd() * xs.length)];
  const d = pick([',', ';', '\t'] as const);
  const eol = pick(['\n', '\r\n', '\n', '\r'] as const);
  const referenceRatio = pick(['1', '1.2345678', '0.99999999999999990000']);
  const r0 = new D(referenceRatio);
  // columns: epoch, value, flag and an unused note, in a random order
  const order = ['epoch', 'value', 'flag', 'note'].sort(() => rnd() - 0.5);
  const col = (name: string) => order.indexOf(name) + 1;
  const withFlag = rnd() < 0.7;
  const mapping: ColumnMapping = { epochColumn: col('epoch'), epochKind: 'mjd', valueColumn: col('value'), valueKind: 'ratio', flagColumn: withFlag ? col('flag') : undefined };
  const lines: string[] = [];
  if (rnd() < 0.5) lines.push('# invented test series, µ ✓ – not from any laboratory');
  if (rnd() < 0.8) lines.push(order.join(d));
  let mjd = 61100 + Math.floor(rnd() * 100);
  const bad = rnd() < 0.3; // a file with problems
  for (let i = 0; i < 400; i++) {
    const u = rnd();
    mjd += (1 + (rnd() < 0.05 ? 10 : 0)) / 86_400;
    let epoch = mjd.toFixed(9);
    const y = (rnd() - 0.5) * 4e-15;
    let value = r0.times(new D(1).plus(y)).toSignificantDigits(21).toFixed();
    let flag = rnd() < 0.1 ? '0' : '1';
    let note = pick(['a', 'b', '', 'x y']);
    if (u < 0.02) { lines.push('# a comment in the middle, ° ✓'); continue; }
    if (u < 0.04) { lines.push(''); continue; }
    if (u < 0.06) epoch = ` ${epoch} `;
    else if (u < 0.07) value = `"${value}"`;
    else if (u < 0.08) flag = pick(['valid', 'invalid', ' 1']);
    else if (u < 0.09) value = new D(value).toExponential(20);
    else if (u < 0.10) epoch = mjd.toFixed(13); // 18 digits: more than the byte reading takes
    else if (u < 0.11) note = 'Grüße ✓';
    else if (bad && u < 0.12) value = 'x1.0';
    else if (bad && u < 0.13) epoch = (mjd - 0.5).toFixed(9); // out of order
    else if (bad && u < 0.14) flag = 'maybe';
    const cells: Record<string, string> = { epoch, value, flag: withFlag ? flag : '7', note };
    lines.push(order.map((c) => cells[c]).join(d));
  }
  const period: [number | null, number | null] = bad && rnd() < 0.5 ? [61100, mjd - 0.0005] : [null, null];
  return { text: lines.join(eol) + (rnd() < 0.8 ? eol : ''), mapping, referenceRatio, period };
}

async function ingest(file: FileCase, chunks: Buffer[], general: boolean) {
  const parts: Buffer[] = [];
  const cells: { epochText: string; valueText: string }[] = [];
  const sink = new Writable({ write(c, _e, cb) { parts.push(c as Buffer); cb(); } });
  const summary = await ingestRatioSeries(Readable.from(chunks), sink, {
    seriesId: '00000000-0000-4000-8000-000000000002', mapping: file.mapping, referenceRatio: file.referenceRatio,
    periodStartMjd: file.period[0], periodEndMjd: file.period[1],
    onRow: general ? (r) => cells.push({ epochText: r.epochText, valueText: r.valueText }) : undefined,
  });
  await finishCopy(sink);
  return { summary, copy: Buffer.concat(parts), cells };
}

function cut(buf: Buffer, sizes: () => number): Buffer[] {
  const out: Buffer[] = [];
  for (let pos = 0; pos < buf.length;) {
    const n = Math.max(1, sizes());
    out.push(buf.subarray(pos, pos + n));
    pos += n;
  }
  return out;
}

const comparable = (s: IngestSummary) => ({ ...s, overview: Array.from(s.overview), overviewStats: Array.from(s.overviewStats) });

describe('ingestRatioSeries: reading usual lines from the bytes', () => {
  it('gives the same outcome as the general reading on 60 random files, however the bytes are cut', async () => {
    let withProblems = 0;
    let rowsSeen = 0;
    for (let f = 0; f < 60; f++) {
      const file = randomFile(1000 + f);
      const bytes = Buffer.from(file.text, 'utf8');
      const reference = await ingest(file, [bytes], true);
      if (reference.summary.issues.length > 0) withProblems++;
      rowsSeen += reference.summary.rowCount;
      const rnd = makeRandom(77 + f);
      for (const chunks of [[bytes], cut(bytes, () => Math.floor(rnd() * 300)), cut(bytes, () => 1 + Math.floor(rnd() * 7)), cut(bytes, () => 4096)]) {
        const fast = await ingest(file, chunks, false);
        expect(comparable(fast.summary), `file ${f}`).toEqual(comparable(reference.summary));
        expect(fast.copy.equals(reference.copy), `file ${f}: COPY bytes`).toBe(true);
      }
    }
    // the random files do exercise both outcomes
    expect(withProblems).toBeGreaterThan(5);
    expect(withProblems).toBeLessThan(55);
    expect(rowsSeen).toBeGreaterThan(10_000);
  });

  it('stores MJD as Number() reads it and y within 2 ulp of decimal.js, for the rows read from the bytes', async () => {
    for (let f = 0; f < 20; f++) {
      const file = randomFile(5000 + f);
      const bytes = Buffer.from(file.text, 'utf8');
      const general = await ingest(file, [bytes], true);
      if (general.summary.issues.length > 0) continue;
      const fast = await ingest(file, cut(bytes, () => 8192), false);
      expect(fast.copy.equals(general.copy)).toBe(true);
      // binary COPY: 19-byte header, then per row int16 field count, (int32 length, value) × 4 (PostgreSQL docs, COPY, binary format)
      const r0 = new D(file.referenceRatio);
      for (let i = 0; i < general.cells.length; i++) {
        const at = 19 + i * 51;
        const mjd = fast.copy.readDoubleBE(at + 26);
        const y = fast.copy.readDoubleBE(at + 38);
        const { epochText, valueText } = general.cells[i];
        expect(mjd).toBe(Number(epochText));
        const want = new D(valueText).div(r0).minus(1).toNumber();
        expect(Math.abs(y - want)).toBeLessThanOrEqual(2 * ulp(want));
      }
    }
  });

  it('names the same line for a lone CR, a NUL byte and a cut multi-byte character as the general reading', async () => {
    const rows = Array.from({ length: 2000 }, (_, i) => `${(61100 + i / 86_400).toFixed(9)},1.00000000000000000${String(i % 100).padStart(2, '0')},1`);
    const mapping: ColumnMapping = { epochColumn: 1, epochKind: 'mjd', valueColumn: 2, valueKind: 'ratio', flagColumn: 3 };
    const variants: [string, (s: IngestSummary) => void][] = [
      // a lone CR ends a line: the same epoch twice, on lines 1501 and 1502
      [rows.join('\n').replace(rows[1500], `${rows[1500]}\r${rows[1500]}`), (s) => expect(s.issues[0]).toMatchObject({ line: 1502, column: '1', message: expect.stringContaining('repeats the epoch of line 1501') })],
      [`${rows.slice(0, 1700).join('\n')}\n${rows[1700]}\0\n${rows.slice(1701).join('\n')}`, (s) => expect(s.issues[0]).toMatchObject({ line: 1701, message: expect.stringContaining('NUL') })],
      [`${rows.slice(0, 900).join('\n')}\n# ✓ µ °\n${rows.slice(900).join('\n')}\n`, (s) => expect(s).toMatchObject({ issues: [], rowCount: 2000, validCount: 2000 })],
    ];
    for (const [text, check] of variants) {
      const file: FileCase = { text, mapping, referenceRatio: '1', period: [null, null] };
      const bytes = Buffer.from(text, 'utf8');
      for (const size of [1000, 4093, 65536]) {
        // a NUL stops the reading at its chunk on both paths: compare with the same cuts
        const reference = await ingest(file, cut(bytes, () => size), true);
        const fast = await ingest(file, cut(bytes, () => size), false);
        check(reference.summary);
        expect(comparable(fast.summary)).toEqual(comparable(reference.summary));
        expect(fast.copy.equals(reference.copy)).toBe(true);
      }
    }
  });
});
