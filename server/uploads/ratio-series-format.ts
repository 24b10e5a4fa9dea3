import { parse as parseCsvSync } from 'csv-parse/sync';
import type { ColumnMapping, UploadPreview } from '../../shared/uploads';

// The ratio-series file layout (docs/formats/ratio-series.md): cell parsers and the preview/suggestion logic.
// Pure functions; the streaming ingest and the preview route both use them.

export const MJD_UNIX_EPOCH = 40587; // MJD of 1970-01-01T00:00:00Z (MJD = JD − 2400000.5; common practice)
const MS_PER_DAY = 86_400_000;
/** |y| beyond this is no clock comparison but a mapping mistake (ratio read as offset or the wrong reference). */
export const MAX_ABS_OFFSET = 1e-3;

// `\d+(\.\d*)?`, not `\d+\.?\d*`: the latter backtracks quadratically on a long run of digits that fails to match.
const NUMBER = /^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d{1,4})?$/;
const NON_FINITE = /^[+-]?(nan|inf|infinity)$/i;
const ISO = /^(\d{4})-(\d{2})-(\d{2})[T ](\d{2}):(\d{2}):(\d{2})(\.\d{1,9})?(Z|[+-]00:?00)?$/;

export type CellResult = { ok: true; value: number } | { ok: false; message: string };

export function parseMjdCell(text: string): CellResult {
  if (NON_FINITE.test(text)) return { ok: false, message: `epoch '${text}' is not a finite number` };
  if (!NUMBER.test(text)) return { ok: false, message: `epoch '${clip(text)}' is not an MJD number` };
  const v = Number(text);
  // 15020 = 1900-01-01, 88069 = 2100-01-01: outside that, the column is not an MJD.
  if (!(v > 15020 && v < 88069)) return { ok: false, message: `epoch ${text} is not a plausible MJD (1900–2100)` };
  return { ok: true, value: v };
}

const daysInMonth = (y: number, m: number) => new Date(Date.UTC(y, m, 0)).getUTCDate();

export function parseIsoCell(text: string): CellResult {
  const m = ISO.exec(text);
  if (!m) return { ok: false, message: `epoch '${clip(text)}' is not an ISO 8601 UTC time such as 2026-03-01T12:00:00.5Z` };
  const [y, mo, d, h, mi, s] = [m[1], m[2], m[3], m[4], m[5], m[6]].map(Number);
  if (mo < 1 || mo > 12 || d < 1 || d > daysInMonth(y, mo) || h > 23 || mi > 59 || s > 59) {
    return { ok: false, message: `epoch '${text}' is not a valid date and time (leap seconds are not accepted)` };
  }
  const frac = m[7] ? Number(`0${m[7]}`) : 0;
  const ms = Date.UTC(y, mo - 1, d, h, mi, s);
  return { ok: true, value: MJD_UNIX_EPOCH + ms / MS_PER_DAY + frac / 86_400 };
}

export function parseOffsetCell(text: string): CellResult {
  if (NON_FINITE.test(text)) return { ok: false, message: `value '${text}' is not a finite number (NaN and Infinity are refused)` };
  if (!NUMBER.test(text)) return { ok: false, message: `value '${clip(text)}' is not a number` };
  const v = Number(text);
  if (!Number.isFinite(v)) return { ok: false, message: `value '${clip(text)}' is not a finite number` };
  // 1e-9999 reads as 0 (and 1e-320 as a subnormal with few digits): refuse rather than store a different number.
  if ((v === 0 && /[1-9]/.test(text.replace(/[eE].*$/, ''))) || (v !== 0 && Math.abs(v) < 2.2250738585072014e-308)) {
    return { ok: false, message: `value '${clip(text)}' is too small for double precision (underflow); write it as 0 if zero is meant` };
  }
  if (Math.abs(v) >= MAX_ABS_OFFSET) return { ok: false, message: `fractional offset ${text} is implausibly large; is the column a ratio?` };
  return { ok: true, value: v };
}

export function parseFlagCell(text: string): boolean | null {
  const t = text.toLowerCase();
  if (t === '1' || t === 'valid') return true;
  if (t === '0' || t === 'invalid') return false;
  return null;
}

export function clip(text: string, n = 40): string {
  return text.length > n ? `${text.slice(0, n)}…` : text;
}

export function isCommentOrBlank(line: string): boolean {
  for (let i = 0; i < line.length; i++) {
    const c = line.charCodeAt(i);
    if (c === 35) return true; // '#'
    if (c !== 32 && c !== 9 && c !== 13) return false;
  }
  return true;
}

/** The delimiter that splits the first data lines into the same number (≥ 2) of cells; tab, then semicolon, then comma. */
export function detectDelimiter(lines: string[]): ',' | ';' | '\t' | null {
  const sample = lines.filter((l) => !isCommentOrBlank(l)).slice(0, 50);
  if (sample.length === 0) return null;
  for (const d of ['\t', ';', ','] as const) {
    const counts = sample.map((l) => l.split(d).length);
    if (counts[0] >= 2 && counts.every((c) => c === counts[0])) return d;
  }
  // A header may differ (e.g. a trailing delimiter); judge by the data lines alone.
  for (const d of ['\t', ';', ','] as const) {
    const counts = sample.slice(1).map((l) => l.split(d).length);
    if (counts.length > 0 && counts[0] >= 2 && counts.every((c) => c === counts[0])) return d;
  }
  return null;
}

const looksLikeData = (cell: string) => NUMBER.test(cell) || ISO.test(cell) || parseFlagCell(cell) !== null || NON_FINITE.test(cell);

export function looksLikeHeader(cells: string[]): boolean {
  return cells.some((c) => c.trim() !== '' && !looksLikeData(c.trim()));
}

function suggest(header: string[] | null, rows: string[][]): UploadPreview['suggested'] {
  const columnCount = Math.max(header?.length ?? 0, ...rows.map((r) => r.length));
  const first = rows.slice(0, 20);
  const all = (col: number, ok: (c: string) => boolean) => first.length > 0 && first.every((r) => r[col] !== undefined && ok(r[col].trim()));
  const byName = (re: RegExp) => (header ? header.findIndex((h) => re.test(h.trim())) : -1);
  let epoch = byName(/^(mjd|epoch|time|date|utc|timestamp|t)\b/i);
  if (epoch < 0) epoch = [...Array(columnCount).keys()].find((c) => all(c, (v) => ISO.test(v) || parseMjdCell(v).ok)) ?? -1;
  if (epoch < 0) return null;
  const epochKind = all(epoch, (v) => ISO.test(v)) ? 'iso' : 'mjd';
  let value = byName(/^(ratio|value|y|offset|frac|r)\b/i);
  if (value < 0 || value === epoch) value = [...Array(columnCount).keys()].find((c) => c !== epoch && all(c, (v) => NUMBER.test(v) && !/^[01]$/.test(v))) ?? -1;
  if (value < 0) return null;
  const valueKind = all(value, (v) => Math.abs(Number(v)) < MAX_ABS_OFFSET) ? 'offset' : 'ratio';
  let flag = byName(/^(flag|valid|ok|status)\b/i);
  if (flag === epoch || flag === value) flag = -1;
  if (flag < 0) flag = [...Array(columnCount).keys()].find((c) => c !== epoch && c !== value && all(c, (v) => parseFlagCell(v) !== null)) ?? -1;
  return { epochColumn: epoch + 1, epochKind, valueColumn: value + 1, valueKind, flagColumn: flag >= 0 ? flag + 1 : null };
}

/** Reads the start of a file (already cut to a size limit) and describes it for the column-mapping step. */
export function buildPreview(text: string, fileName: string, bytesRead: number, truncated: boolean): UploadPreview {
  const notes: string[] = [];
  let body = text.charCodeAt(0) === 0xfeff ? text.slice(1) : text;
  if (body.includes('\r')) body = body.replace(/\r\n?/g, '\n'); // CRLF and CR-only line ends read as LF
  if (truncated) {
    // The last line may be cut in the middle; drop it.
    const lastNl = body.lastIndexOf('\n');
    body = lastNl >= 0 ? body.slice(0, lastNl + 1) : '';
    notes.push(`Only the first ${bytesRead} bytes were read for this preview.`);
  }
  const lines = body.split('\n');
  const delimiter = detectDelimiter(lines.map((l) => l.replace(/\r$/, ''))) ?? ',';
  if (!detectDelimiter(lines)) notes.push('No delimiter splits the lines consistently; comma assumed.');
  const records = parseCsvSync(body, { delimiter, comment: "#", relax_column_count: true, skip_empty_lines: true, info: true, trim: true }) as unknown as {
    record: string[];
    info: { lines: number };
  }[];
  const hasHeader = records.length > 0 && looksLikeHeader(records[0].record);
  const header = hasHeader ? records[0].record : null;
  const data = records.slice(hasHeader ? 1 : 0);
  const rows = data.slice(0, 20).map((r) => ({ line: r.info.lines, cells: r.record }));
  const columnCount = Math.max(header?.length ?? 0, ...data.slice(0, 20).map((r) => r.record.length), 0);
  const suggested = suggest(header, data.map((r) => r.record));
  if (!suggested) notes.push('No column could be recognised as an epoch and a value; choose the columns yourself.');
  return { fileName, bytesRead, delimiter, hasHeader, header, columnCount, rows, suggested, notes };
}

/** The mapping a client sends, completed with what the preview logic would detect. */
export type ResolvedMapping = Required<Pick<ColumnMapping, 'epochColumn' | 'epochKind' | 'valueColumn' | 'valueKind'>> & {
  flagColumn: number | null;
  delimiter: ',' | ';' | '\t';
  hasHeader: boolean;
};
