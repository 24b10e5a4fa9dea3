import crypto from 'node:crypto';
import { isAscii } from 'node:buffer';
import { once } from 'node:events';
import type { Readable, Writable } from 'node:stream';
import { parse as parseCsvSync } from 'csv-parse/sync';
import type { FieldIssue } from '../http/errors';
import { createRatioConverter } from './ratio-to-offset';
import {
  detectDelimiter, isCommentOrBlank, looksLikeHeader, parseFlagCell, parseIsoCell, parseMjdCell, parseOffsetCell, type CellResult,
} from './ratio-series-format';
import type { ColumnMapping } from '../../shared/uploads';

// Streaming ingest of one ratio-series file: bytes → SHA-256 + raw copy → UTF-8 check → lines split into cells → rows checked
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
  onProgress?: (p: { bytesRead: number; rowsProcessed: number }) => void | Promise<void>;
  /** stop reading once this many bytes arrived (the HTTP layer also enforces it) */
  limitBytes?: number;
  /** longest line accepted, in characters (default 64 KiB); a longer one is refused and parsing stops */
  maxLineChars?: number;
  /** receives every accepted data row with its cells as written (the samples export re-reads the raw file with it) */
  onRow?: (row: { line: number; epochText: string; valueText: string; mjd: number; y: number; valid: boolean }) => void;
};

export const DEFAULT_MAX_LINE_CHARS = 64 * 1024;

// Powers of ten up to 10¹⁵ are exact in float64 (literals are read correctly rounded).
const POW10 = [1, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15];

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
  /** block summaries for plots: [firstMjd, lastMjd, minY, maxY, validCount] × blocks (see series-plot.ts) */
  overview: Float64Array;
  /** per block: [mean, M2] of the valid y (Welford), M2 = Σ(y − mean)²; same block order as `overview` */
  overviewStats: Float64Array;
};

const MAX_LISTED_ISSUES = 10;
const BATCH_BYTES = 1 << 20;
const ROW_BYTES = 2 + 4 + 16 + 4 + 8 + 4 + 8 + 4 + 1;
export const COPY_BINARY_HEADER = Buffer.concat([Buffer.from('PGCOPY\n\xff\r\n\0', 'latin1'), Buffer.alloc(8)]);
const COPY_TRAILER = Buffer.from([0xff, 0xff]);

/** The COPY statement matching the binary rows this module writes. */
export const COPY_SAMPLES_SQL = 'COPY ratio_sample (series_id, mjd, y, valid) FROM STDIN (FORMAT binary)';

function uuidBytes(uuid: string): Buffer {
  return Buffer.from(uuid.replace(/-/g, ''), 'hex');
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
  const u0 = seriesUuid.readInt32BE(0), u1 = seriesUuid.readInt32BE(4), u2 = seriesUuid.readInt32BE(8), u3 = seriesUuid.readInt32BE(12);
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
  // Plot overview: consecutive samples summarised in blocks of ≤ 64, a new block after any spacing over twice the
  // previous one so no block bridges a gap.
  let overview = new Float64Array(5 * 1024);
  let overviewStats = new Float64Array(2 * 1024);
  let blocks = 0;
  let bFirst = 0, bLast = 0, bMin = Infinity, bMax = -Infinity, bValid = 0, bCount = 0, prevSpacing = Infinity, bMean = 0, bM2 = 0;
  const closeBlock = () => {
    if (bCount === 0) return;
    if ((blocks + 1) * 5 > overview.length) {
      const grown = new Float64Array(overview.length * 2);
      grown.set(overview);
      overview = grown;
      const grownStats = new Float64Array(overviewStats.length * 2);
      grownStats.set(overviewStats);
      overviewStats = grownStats;
    }
    overview.set([bFirst, bLast, bValid ? bMin : NaN, bValid ? bMax : NaN, bValid], blocks * 5);
    overviewStats.set([bValid ? bMean : NaN, bValid ? bM2 : NaN], blocks * 2);
    blocks++;
    bCount = 0; bValid = 0; bMin = Infinity; bMax = -Infinity; bMean = 0; bM2 = 0;
  };
  const addToOverview = (mjd: number, y: number, valid: boolean) => {
    if (bCount > 0) {
      const spacing = mjd - bLast;
      if (bCount >= 64 || spacing > 2 * prevSpacing) closeBlock();
      prevSpacing = spacing;
    }
    if (bCount === 0) bFirst = mjd;
    bLast = mjd;
    bCount++;
    if (valid) {
      bValid++;
      if (y < bMin) bMin = y;
      if (y > bMax) bMax = y;
      // Welford's update (Welford 1962, Technometrics 4(3) 419–420): stable for y ≈ 1e-14 with 1e-17 noise.
      const d = y - bMean;
      bMean += d / bValid;
      bM2 += d * (y - bMean);
    }
  };
  const colName = (c: number) => (header?.[c - 1] ? ` (${header[c - 1]})` : '');

  // Binary COPY batching with back-pressure from the sink.
  let batch = Buffer.allocUnsafe(BATCH_BYTES);
  let view = new DataView(batch.buffer, batch.byteOffset, batch.byteLength);
  let off = 0;
  let sinkFull = false;
  let sinkError: Error | null = null;
  sink.on('error', (e: Error) => (sinkError = e));
  const flush = () => {
    if (off === 0) return;
    if (!sink.write(batch.subarray(0, off))) sinkFull = true;
    batch = Buffer.allocUnsafe(BATCH_BYTES);
    view = new DataView(batch.buffer, batch.byteOffset, batch.byteLength);
    off = 0;
  };
  if (!sink.write(COPY_BINARY_HEADER)) sinkFull = true;

  // A row whose cells are read: the spacing histogram, the counts, the plot overview and its binary COPY row. `bad`
  // rows (epoch out of order or outside the period, already reported) count but are not summarised.
  const commitRow = (mjd: number, y: number, valid: boolean, bad: boolean) => {
    if (!bad) {
      if (rowCount === 0) firstMjd = mjd;
      else {
        const key = Math.round((mjd - lastMjd) * 86_400 * 1e6);
        spacingCounts.set(key, (spacingCounts.get(key) ?? 0) + 1);
      }
    }
    lastMjd = mjd;
    rowCount++;
    if (valid) validCount++;
    if (failed) return;
    addToOverview(mjd, y, valid);
    if (off + ROW_BYTES > BATCH_BYTES) flush();
    view.setInt16(off, 4);
    view.setInt32(off + 2, 16);
    view.setInt32(off + 6, u0);
    view.setInt32(off + 10, u1);
    view.setInt32(off + 14, u2);
    view.setInt32(off + 18, u3);
    view.setInt32(off + 22, 8);
    view.setFloat64(off + 26, mjd);
    view.setInt32(off + 34, 8);
    view.setFloat64(off + 38, y);
    view.setInt32(off + 46, 1);
    batch[off + 50] = valid ? 1 : 0;
    off += ROW_BYTES;
  };

  let headerPending = true;
  const onRecord = (rec: string[], line: number) => {
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
    commitRow(mjd, y, valid, bad);
    if (!failed) opts.onRow?.({ line, epochText, valueText, mjd, y, valid });
    lastLine = line;
  };

  let bytesRead = 0;
  let lineNo = 0; // lines fully handed on so far
  let pending = '';
  let carriedCr = false;
  let binaryProblem = false;
  let lineTooLong = false;
  const maxLine = opts.maxLineChars ?? DEFAULT_MAX_LINE_CHARS;
  const refuseLongLine = (line: number) => {
    report({ path: 'file', line, column: '1', message: `line ${line} is longer than ${maxLine} characters (the limit for one line); is the file missing its line ends?` });
    lineTooLong = true;
  };
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

  // The usual data line read in place from the raw bytes of an ASCII chunk, without making strings: the expected
  // number of cells, an MJD of plain digits ("61100.000011574", at most 15 digits), a plain ratio (or an offset cell
  // without surrounding blanks), a flag 1 or 0, an epoch after the previous one and inside the period. For any other
  // line it returns false having changed nothing, and the line takes the general path (`handleLine`); so both paths
  // give the same rows, values and messages. An MJD of ≤ 15 digits N·10⁻ᵏ is read as N / 10ᵏ: N and 10ᵏ are exact
  // in float64 and the one division rounds correctly, as Number() does (IEEE 754-2019 §5.12 and §4.3).
  const fastRows = m.epochKind === 'mjd' && !opts.onRow;
  const plainRatio = toY ? toY.plain : null;
  const plainEnd = toY ? toY.plainEnd : () => 0;
  const fastRow = (b: Buffer, s: number, e: number): boolean => {
    if (expectedColumns < needed || s === e) return false;
    const c0 = b[s];
    if (c0 === 35 || c0 === 32 || c0 === 9) return false; // maybe a comment or a blank line
    // one pass over the line: each mapped cell is read where it lies, the others skipped
    let mjd = NaN, y = NaN, valid = true;
    let cells = 0;
    for (let cs = s; ;) {
      let ce = cs;
      if (cells === ei) {
        let digits = 0, dot = -1, whole = 0;
        for (; ce < e; ce++) {
          const c = b[ce];
          if (c === dc) break;
          if (c === 46) {
            if (dot >= 0) return false;
            dot = ce;
          } else if (c >= 48 && c <= 57) {
            whole = whole * 10 + (c - 48);
            digits++;
          } else return false;
        }
        if (digits === 0 || digits > 15) return false;
        mjd = dot < 0 || dot === ce - 1 ? whole : whole / POW10[ce - dot - 1];
      } else if (cells === vi) {
        if (plainRatio) {
          y = plainRatio(b, cs, e, dc);
          if (!(Math.abs(y) < 1e-3)) return false; // NaN too: not the plain form
          ce = plainEnd();
        } else {
          while (ce < e && b[ce] !== dc) ce++;
          if (ce === cs || b[cs] <= 32 || b[ce - 1] <= 32) return false; // a blank at either end: trimmed on the general path
          const r = parseOffsetCell(b.toString('latin1', cs, ce));
          if (!r.ok) return false;
          y = r.value;
        }
      } else if (cells === fi) {
        const f = b[cs];
        ce = cs + 1;
        if (ce > e || (ce < e && b[ce] !== dc)) return false;
        if (f === 49) valid = true;
        else if (f === 48) valid = false;
        else return false;
      } else {
        while (ce < e && b[ce] !== dc) ce++;
      }
      cells++;
      if (ce === e) break;
      cs = ce + 1;
    }
    if (cells !== expectedColumns || Number.isNaN(y)) return false;
    if (!(mjd > 15020 && mjd < 88069) || mjd <= lastMjd) return false;
    if ((opts.periodStartMjd !== null && mjd < opts.periodStartMjd) || (opts.periodEndMjd !== null && mjd > opts.periodEndMjd)) return false;
    commitRow(mjd, y, valid, false);
    lastLine = lineNo;
    return true;
  };
  let dc = delimiter ? delimiter.charCodeAt(0) : 0; // the delimiter's character code, once known

  /** One complete line (no line end) on the general path: comments and blanks skipped, quoted cells through csv-parse. */
  const handleLine = (l: string, d: string, quotes: boolean) => {
    const c0 = l.charCodeAt(0);
    if (l.length === 0 || ((c0 === 35 || c0 === 32 || c0 === 9) && isCommentOrBlank(l))) return;
    if (quotes && l.includes('"')) {
      let rec: string[];
      try {
        rec = (parseCsvSync(l, { delimiter: d, relax_column_count: true }) as string[][])[0] ?? [''];
      } catch (e) {
        report({ path: 'file', line: lineNo, column: String(l.slice(0, l.indexOf('"')).split(d).length), message: `a quoted cell is malformed (${(e as Error).message.split(':')[0]}); cells may not span lines` });
        return;
      }
      onRecord(rec, lineNo);
    } else {
      onRecord(l.split(d), lineNo);
    }
  };

  // Splits complete lines into cells. Plain lines are split on the delimiter directly; a line holding a quote goes
  // through csv-parse (quoted cells, doubled quotes). Splitting plain lines here instead of streaming every line
  // through csv-parse keeps a million rows within the ingest budget (csv-parse alone measured ~2 µs per row).
  let held = '';
  const feed = (input: string, final = false) => {
    let text = input;
    if (delimiter === null) {
      // Wait for a few data lines (or the end of the file) before choosing the delimiter.
      held += input;
      const sample = held.split('\n').map((l) => l.replace(/\r$/, '')).filter((l) => !isCommentOrBlank(l));
      if (!final && sample.length < 6 && held.length < 65_536) return;
      delimiter = detectDelimiter(sample) ?? ',';
      text = held;
      held = '';
    }
    const d = delimiter;
    if (text.includes('\r')) text = text.replaceAll('\r\n', '\n');
    const quotes = text.includes('"');
    const lines = text.split('\n');
    // a chunk of complete lines ends with a newline: the empty piece after it is no line
    const count = text.charCodeAt(text.length - 1) === 10 ? lines.length - 1 : lines.length;
    for (let i = 0; i < count; i++) {
      lineNo++;
      if (lines[i].length > maxLine) {
        refuseLongLine(lineNo);
        return;
      }
      handleLine(lines[i], d, quotes);
    }
  };

  // An ASCII chunk without NUL, quote or lone CR, once the delimiter and the header are known: its first line
  // completes the unfinished one on the general path; every further complete line is read from the bytes
  // (`fastRow`) or, when it is not the usual kind, as a string on the general path; the rest waits in `pending`.
  const feedBytes = (chunk: Buffer) => {
    const firstNl = chunk.indexOf(10);
    if (firstNl < 0) {
      pending += chunk.toString('latin1');
      return;
    }
    feed(pending + chunk.toString('latin1', 0, firstNl + 1));
    pending = '';
    if (lineTooLong) return;
    const d = delimiter!;
    const lastNl = chunk.lastIndexOf(10);
    for (let s = firstNl + 1; s <= lastNl;) {
      const nl = chunk.indexOf(10, s);
      const e = chunk[nl - 1] === 13 ? nl - 1 : nl; // CRLF
      lineNo++;
      if (e - s > maxLine) {
        refuseLongLine(lineNo);
        return;
      }
      if (!fastRow(chunk, s, e)) handleLine(chunk.toString('latin1', s, e), d, false);
      s = nl + 1;
    }
    pending = chunk.toString('latin1', lastNl + 1);
  };
  /** Whether `feedBytes` may take this chunk: ASCII, no NUL and no quote, every CR followed by an LF in the chunk. */
  const bytePathFits = (chunk: Buffer) => {
    if (!fastRows || delimiter === null || held !== '' || headerPending || carriedCr || decoderHolds || firstText) return false;
    if (!isAscii(chunk) || chunk.indexOf(0) >= 0 || chunk.indexOf(34) >= 0) return false;
    for (let cr = chunk.indexOf(13); cr >= 0; cr = chunk.indexOf(13, cr + 2)) if (chunk[cr + 1] !== 10) return false;
    return true;
  };
  let decoderHolds = false; // whether the UTF-8 decoder may hold the start of a character cut at a chunk's end

  for await (const raw of file) {
    const chunk = raw as Buffer;
    bytesRead += chunk.length;
    hash.update(chunk);
    opts.onRawChunk?.(chunk);
    if (bytesRead > limit) tooLarge = true;
    if (tooLarge || binaryProblem || lineTooLong) continue; // keep reading so the client hears the answer; parse no further
    if (bytePathFits(chunk)) {
      feedBytes(chunk);
    } else {
      feedText(chunk);
      if (delimiter !== null) dc = delimiter.charCodeAt(0);
    }
    if (!lineTooLong && pending.length > maxLine + 1) {
      // the unfinished line comes after every line handed on, and after those still held for delimiter detection
      let heldLines = 0;
      for (let i = held.indexOf('\n'); i >= 0; i = held.indexOf('\n', i + 1)) heldLines++;
      refuseLongLine(lineNo + heldLines + 1);
    }
    if (sinkFull) {
      sinkFull = false;
      await once(sink, 'drain');
    }
    if (sinkError) throw sinkError;
    const waiting = opts.onProgress?.({ bytesRead, rowsProcessed: rowCount });
    if (waiting) await waiting;
  }
  function feedText(chunk: Buffer) {
    decoderHolds = chunk[chunk.length - 1] >= 0x80;
    let text = decoder.decode(chunk, { stream: true });
    if (firstText) {
      firstText = false;
      if (text.charCodeAt(0) === 0xfeff) text = text.slice(1);
    }
    const nul = text.indexOf('\0');
    const bad = text.indexOf('\uFFFD');
    if (nul >= 0 || bad >= 0) {
      const at = nul >= 0 && (bad < 0 || nul < bad) ? nul : bad;
      const where = locateInText(held + pending + text, held.length + pending.length + at);
      report({ path: 'file', ...where, message: nul === at ? 'the file holds NUL bytes: it is a binary file, not CSV text' : 'the file is not valid UTF-8 text' });
      binaryProblem = true;
      return;
    }
    // CR-only line ends (old Mac text files) become LF; a CR ending a chunk waits, as it may begin a CRLF.
    if (carriedCr) text = `\r${text}`;
    carriedCr = text.endsWith('\r');
    if (carriedCr) text = text.slice(0, -1);
    if (text.includes('\r')) text = text.replace(/\r(?!\n)/g, '\n');
    // Only the new text is searched for a line end, so a file without any stays linear; the unfinished line is
    // bounded by the line-length limit.
    const lastNl = text.lastIndexOf('\n');
    if (lastNl >= 0) {
      const complete = pending + text.slice(0, lastNl + 1);
      pending = text.slice(lastNl + 1);
      feed(complete);
    } else {
      pending += text;
    }
  }
  // busboy marks a part cut at its size limit; its 'limit' event may have fired before this function listened
  if ((file as Readable & { truncated?: boolean }).truncated) tooLarge = true;
  if (!tooLarge && !binaryProblem && !lineTooLong) {
    const rest = pending + (carriedCr ? '\n' : '') + decoder.decode();
    if (rest.length > 0 || held.length > 0) feed(rest, true);
  }
  flush();
  if (!tooLarge && !binaryProblem && !lineTooLong && rowCount === 0 && !failed) {
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
        // MJD written with 8–9 decimals resolves 0.9–0.09 ms: state τ0 to the millisecond from 0.1 s up.
        tau0Seconds = k >= 1e5 ? Math.round(k / 1e3) / 1e3 : k / 1e6;
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
    overview: (closeBlock(), overview.slice(0, blocks * 5)),
    overviewStats: overviewStats.slice(0, blocks * 2),
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
