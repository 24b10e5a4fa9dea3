import crypto from 'node:crypto';
import { once } from 'node:events';
import type { Readable, Writable } from 'node:stream';
import { parse as csvParse } from 'csv-parse';
import type { FieldIssue } from '../http/errors';
import { createRatioConverter } from './ratio-to-offset';
import {
  detectDelimiter, isCommentOrBlank, looksLikeHeader, parseFlagCell, parseIsoCell, parseMjdCell, parseOffsetCell, type CellResult,
} from './ratio-series-format';
import type { ColumnMapping } from '../../shared/uploads';

// Streaming ingest of one ratio-series file: bytes → SHA-256 + raw copy → UTF-8 check → csv-parse → rows checked
// and converted to y → PostgreSQL binary COPY rows. Nothing is buffered beyond a chunk; the caller owns the
// transaction and rolls it back when `issues` is not empty.

export type IngestOptions = {
  seriesId: string;
  mapping: ColumnMapping;
  referenceRatio: string;
  periodStartMjd: number | null;
  periodEndMjd: number | null;
  /** receives every raw chunk (the caller keeps the raw file) */
  onRawChunk?: (chunk: Buffer) => void;
  onProgress?: (p: { bytesRead: number; rowsProcessed: number }) => void;
  /** stop reading once this many bytes arrived (the HTTP layer also enforces it) */
  limitBytes?: number;
};

export type IngestSummary = {
  sha256: string;
  byteSize: number;
  rowCount: number;
  validCount: number;
  firstMjd: number;
  lastMjd: number;
  tau0Seconds: number;
  uptimeFraction: number;
  delimiter: ',' | ';' | '\t';
  hasHeader: boolean;
  header: string[] | null;
  issues: FieldIssue[];
  /** problems found after the ones listed in `issues` */
  furtherProblems: number;
  tooLarge: boolean;
};

const MAX_LISTED_ISSUES = 10;
const BATCH_BYTES = 1 << 20;
const ROW_BYTES = 2 + 4 + 16 + 4 + 8 + 4 + 8 + 4 + 1;
const COPY_HEADER = Buffer.concat([Buffer.from('PGCOPY\n\xff\r\n\0', 'latin1'), Buffer.alloc(8)]);
const COPY_TRAILER = Buffer.from([0xff, 0xff]);

/** The COPY statement matching the binary rows this module writes. */
export const COPY_SAMPLES_SQL = 'COPY ratio_sample (series_id, mjd, y, valid) FROM STDIN (FORMAT binary)';

function uuidBytes(uuid: string): Buffer {
  return Buffer.from(uuid.replace(/-/g, ''), 'hex');
}

/** Line queue: the file line number of each record handed to the CSV parser, stored as runs [start, count]. */
class LineRuns {
  private runs: number[] = [];
  private head = 0;
  push(start: number, count: number) {
    const n = this.runs.length;
    if (n > this.head && this.runs[n - 2] + this.runs[n - 1] === start) this.runs[n - 1] += count;
    else this.runs.push(start, count);
  }
  shift(): number {
    const line = this.runs[this.head];
    if (--this.runs[this.head + 1] === 0) {
      this.head += 2;
      if (this.head > 4096) {
        this.runs = this.runs.slice(this.head);
        this.head = 0;
      }
    } else {
      this.runs[this.head] = line + 1;
    }
    return line;
  }
}

export async function ingestRatioSeries(file: Readable, sink: Writable, opts: IngestOptions): Promise<IngestSummary> {
  const m = opts.mapping;
  const hash = crypto.createHash('sha256');
  const decoder = new TextDecoder('utf-8', { fatal: false, ignoreBOM: false });
  const issues: FieldIssue[] = [];
  let furtherProblems = 0;
  let failed = false;
  const report = (issue: FieldIssue) => {
    failed = true;
    if (issues.length < MAX_LISTED_ISSUES) issues.push(issue);
    else furtherProblems++;
  };

  const toY = m.valueKind === 'ratio' ? createRatioConverter(opts.referenceRatio) : null;
  const parseEpoch: (t: string) => CellResult = m.epochKind === 'iso' ? parseIsoCell : parseMjdCell;
  const needed = Math.max(m.epochColumn, m.valueColumn, m.flagColumn ?? 0);
  const seriesUuid = uuidBytes(opts.seriesId);
  const ei = m.epochColumn - 1;
  const vi = m.valueColumn - 1;
  const fi = m.flagColumn ? m.flagColumn - 1 : -1;

  let delimiter: ',' | ';' | '\t' | null = m.delimiter ?? null;
  let hasHeader: boolean | null = m.hasHeader ?? null;
  let header: string[] | null = null;
  let expectedColumns = 0;
  let rowCount = 0;
  let validCount = 0;
  let firstMjd = NaN;
  let lastMjd = NaN;
  let lastLine = 0;
  const spacingCounts = new Map<number, number>();
  const colName = (c: number) => (header?.[c - 1] ? ` (${header[c - 1]})` : '');

  // Binary COPY batching with back-pressure from the sink.
  let batch = Buffer.allocUnsafe(BATCH_BYTES);
  let off = 0;
  let sinkFull = false;
  let sinkError: Error | null = null;
  sink.on('error', (e: Error) => (sinkError = e));
  const flush = () => {
    if (off === 0) return;
    if (!sink.write(batch.subarray(0, off))) sinkFull = true;
    batch = Buffer.allocUnsafe(BATCH_BYTES);
    off = 0;
  };
  if (!sink.write(COPY_HEADER)) sinkFull = true;

  const lines = new LineRuns();
  let headerPending = true;
  const onRecord = (rec: string[]) => {
    const line = lines.shift();
    if (headerPending) {
      headerPending = false;
      if (hasHeader === null) hasHeader = looksLikeHeader(rec);
      if (hasHeader) {
        header = rec.map((c) => c.trim());
        expectedColumns = rec.length;
        return;
      }
    }
    if (rec.length === 1 && rec[0].trim() === '') return;
    if (expectedColumns === 0) expectedColumns = rec.length;
    if (rec.length < needed) {
      report({ path: 'file', line, column: String(rec.length + 1), message: `line ${line} has ${rec.length} column(s); the chosen mapping needs column ${needed}${colName(needed)}` });
      return;
    }
    if (rec.length !== expectedColumns) {
      report({ path: 'file', line, column: String(Math.min(rec.length, expectedColumns) + 1), message: `line ${line} has ${rec.length} columns where the ${header ? 'header' : 'first data line'} has ${expectedColumns}` });
      return;
    }
    const epochText = rec[ei].trim();
    const e = parseEpoch(epochText);
    if (!e.ok) {
      report({ path: 'file', line, column: String(m.epochColumn), message: e.message });
      return;
    }
    const mjd = e.value;
    let bad = false;
    if (mjd <= lastMjd) {
      report({
        path: 'file', line, column: String(m.epochColumn),
        message: mjd === lastMjd ? `epoch ${epochText} repeats the epoch of line ${lastLine}` : `epoch ${epochText} is earlier than the epoch of line ${lastLine}; epochs must increase`,
      });
      bad = true;
    } else if ((opts.periodStartMjd !== null && mjd < opts.periodStartMjd) || (opts.periodEndMjd !== null && mjd > opts.periodEndMjd)) {
      report({ path: 'file', line, column: String(m.epochColumn), message: `epoch ${epochText} lies outside the campaign period (MJD ${opts.periodStartMjd ?? '…'} to ${opts.periodEndMjd ?? '…'})` });
      bad = true;
    }
    const valueText = rec[vi].trim();
    let y: number;
    if (toY) {
      const r = toY(valueText);
      if (!r.ok) {
        if (!bad) report({ path: 'file', line, column: String(m.valueColumn), message: `ratio '${valueText.slice(0, 40)}' ${r.message}` });
        return;
      }
      y = r.y;
      if (Math.abs(y) >= 1e-3 && !bad) {
        report({ path: 'file', line, column: String(m.valueColumn), message: `ratio ${valueText} differs from the campaign reference ratio by ${y.toExponential(2)}; is the column an offset, or the reference wrong?` });
        return;
      }
    } else {
      const r = parseOffsetCell(valueText);
      if (!r.ok) {
        if (!bad) report({ path: 'file', line, column: String(m.valueColumn), message: r.message });
        return;
      }
      y = r.value;
    }
    let valid = true;
    if (fi >= 0) {
      const f = parseFlagCell(rec[fi].trim());
      if (f === null) {
        if (!bad) report({ path: 'file', line, column: String(m.flagColumn), message: `flag '${rec[fi].trim().slice(0, 20)}' is not one of valid, invalid, 1, 0` });
        return;
      }
      valid = f;
    }
    if (!bad) {
      if (rowCount === 0) firstMjd = mjd;
      else {
        const key = Math.round((mjd - lastMjd) * 86_400 * 1e6);
        spacingCounts.set(key, (spacingCounts.get(key) ?? 0) + 1);
      }
    }
    lastMjd = mjd;
    lastLine = line;
    rowCount++;
    if (valid) validCount++;
    if (failed) return;
    if (off + ROW_BYTES > BATCH_BYTES) flush();
    batch.writeInt16BE(4, off);
    batch.writeInt32BE(16, off + 2);
    seriesUuid.copy(batch, off + 6);
    batch.writeInt32BE(8, off + 22);
    batch.writeDoubleBE(mjd, off + 26);
    batch.writeInt32BE(8, off + 34);
    batch.writeDoubleBE(y, off + 38);
    batch.writeInt32BE(1, off + 46);
    batch[off + 50] = valid ? 1 : 0;
    off += ROW_BYTES;
  };

  let parser: ReturnType<typeof csvParse> | null = null;
  let parserFailed = false;
  const startParser = (d: ',' | ';' | '\t') => {
    const p = csvParse({ delimiter: d, relax_column_count: true, relax_quotes: true });
    p.on('data', onRecord);
    p.on('error', (err: Error & { lines?: number }) => {
      parserFailed = true;
      report({ path: 'file', line: err.lines ?? lineNo, column: '1', message: `the CSV parser stopped: ${err.message}` });
    });
    return p;
  };

  let bytesRead = 0;
  let lineNo = 0; // lines fully handed on so far
  let pending = '';
  let binaryProblem = false;
  let firstText = true;
  let tooLarge = false;
  const limit = opts.limitBytes ?? Infinity;
  (file as Readable & { truncated?: boolean }).on?.('limit', () => (tooLarge = true));

  const locateInText = (text: string, index: number) => {
    const before = text.slice(0, index);
    const nl = before.lastIndexOf('\n');
    let l = lineNo + 1;
    for (let i = before.indexOf('\n'); i >= 0; i = before.indexOf('\n', i + 1)) l++;
    const lineStart = before.slice(nl + 1);
    const d = delimiter ?? detectDelimiter(text.split('\n')) ?? ',';
    const col = lineStart.split(d).length;
    return { line: l, column: String(col) };
  };

  // Hands complete lines to the parser, recording line numbers; comment and blank lines are dropped here.
  const feed = async (text: string) => {
    if (!parser) {
      delimiter ??= detectDelimiter(text.split('\n').map((l) => l.replace(/\r$/, ''))) ?? ',';
      parser = startParser(delimiter);
    }
    if (text.includes('\r')) text = text.replaceAll('\r\n', '\n');
    const simple = !text.includes('#') && !text.includes('"') && !text.includes('\n\n') && text.charCodeAt(0) !== 10;
    let out: string;
    if (simple) {
      let count = 0;
      for (let i = text.indexOf('\n'); i >= 0; i = text.indexOf('\n', i + 1)) count++;
      lines.push(lineNo + 1, count);
      lineNo += count;
      out = text;
    } else {
      const parts: string[] = [];
      let start = 0;
      while (start < text.length) {
        const nl = text.indexOf('\n', start);
        const end = nl < 0 ? text.length : nl;
        const l = text.slice(start, end);
        lineNo++;
        start = end + 1;
        if (isCommentOrBlank(l)) continue;
        if (l.includes('"') && (l.split('"').length - 1) % 2 === 1) {
          report({ path: 'file', line: lineNo, column: String(delimiter ? l.slice(0, l.indexOf('"')).split(delimiter).length : 1), message: 'a quoted cell is not closed on its line (cells may not span lines)' });
          continue;
        }
        parts.push(l);
        lines.push(lineNo, 1);
      }
      out = parts.length ? `${parts.join('\n')}\n` : '';
    }
    if (out && !parserFailed && !parser.write(out)) await once(parser, 'drain').catch(() => undefined);
  };

  for await (const raw of file) {
    const chunk = raw as Buffer;
    bytesRead += chunk.length;
    hash.update(chunk);
    opts.onRawChunk?.(chunk);
    if (bytesRead > limit) tooLarge = true;
    if (tooLarge || binaryProblem) continue; // keep reading so the client hears the answer; parse no further
    let text = decoder.decode(chunk, { stream: true });
    if (firstText) {
      firstText = false;
      if (text.charCodeAt(0) === 0xfeff) text = text.slice(1);
    }
    const nul = text.indexOf('\0');
    const bad = text.indexOf('\uFFFD');
    if (nul >= 0 || bad >= 0) {
      const at = nul >= 0 && (bad < 0 || nul < bad) ? nul : bad;
      const where = locateInText(pending + text, pending.length + at);
      report({ path: 'file', ...where, message: nul === at ? 'the file holds NUL bytes: it is a binary file, not CSV text' : 'the file is not valid UTF-8 text' });
      binaryProblem = true;
      continue;
    }
    pending += text;
    const lastNl = pending.lastIndexOf('\n');
    if (lastNl >= 0) {
      const complete = pending.slice(0, lastNl + 1);
      pending = pending.slice(lastNl + 1);
      await feed(complete);
    }
    if (sinkFull) {
      sinkFull = false;
      await once(sink, 'drain');
    }
    if (sinkError) throw sinkError;
    opts.onProgress?.({ bytesRead, rowsProcessed: rowCount });
  }
  if (!tooLarge && !binaryProblem) {
    const rest = pending + decoder.decode();
    if (rest.length > 0) await feed(rest.endsWith('\n') ? rest : `${rest}\n`);
  }
  if (parser && !parserFailed) {
    const p = parser as ReturnType<typeof csvParse>;
    const ended = once(p, 'end');
    p.end();
    await ended;
  }
  flush();
  if (!tooLarge && !binaryProblem && rowCount === 0 && !failed) {
    report({ path: 'file', line: Math.max(1, lineNo), column: '1', message: bytesRead === 0 ? 'the file is empty' : 'the file holds no data rows' });
  }
  opts.onProgress?.({ bytesRead, rowsProcessed: rowCount });

  // Median spacing from the histogram of spacings (µs resolution); uptime = valid samples × τ0 over the span.
  let tau0Seconds = 0;
  const total = [...spacingCounts.values()].reduce((a, b) => a + b, 0);
  if (total > 0) {
    const keys = [...spacingCounts.keys()].sort((a, b) => a - b);
    let acc = 0;
    for (const k of keys) {
      acc += spacingCounts.get(k)!;
      if (acc * 2 >= total) {
        tau0Seconds = k / 1e6;
        break;
      }
    }
  }
  const spanSeconds = rowCount > 0 ? (lastMjd - firstMjd) * 86_400 : 0;
  const uptimeFraction = tau0Seconds > 0 ? Math.min(1, (validCount * tau0Seconds) / (spanSeconds + tau0Seconds)) : validCount > 0 ? 1 : 0;

  return {
    sha256: hash.digest('hex'), byteSize: bytesRead, rowCount, validCount,
    firstMjd, lastMjd, tau0Seconds, uptimeFraction,
    delimiter: delimiter ?? ',', hasHeader: hasHeader ?? false, header,
    issues, furtherProblems, tooLarge,
  };
}

/** Ends the binary COPY stream (trailer) and waits until PostgreSQL has taken all rows. */
export async function finishCopy(sink: Writable): Promise<void> {
  const done = new Promise<void>((resolve, reject) => {
    sink.once('finish', resolve);
    sink.once('error', reject);
  });
  sink.end(COPY_TRAILER);
  await done;
}
