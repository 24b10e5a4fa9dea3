import crypto from 'node:crypto';
import { Transform, type Readable } from 'node:stream';
import { parse } from 'csv-parse';
import type { Request } from 'express';
import type { DataSource } from 'typeorm';
import { sectionInputSchema, type SectionInput, type SectionUploadResult } from '../../shared/network';
import { recordAudit } from '../audit/audit.service';
import type { Actor } from '../auth/actor';
import { authorize } from '../auth/permissions';
import { HeightDatumEntity } from '../db/entities/network.entities';
import { Conflict, Invalid, PayloadTooLarge } from '../http/errors';
import { receiveMultipart } from '../uploads/multipart';
import { createNetworkService, runCheck } from './network.service';

// Levelling-section CSV upload (format: docs/formats/levelling-sections.md), read as a stream. The whole file is
// checked before anything is stored; the first offending line and column are named; the rows go in one transaction.

export const SECTION_COLUMNS = ['line', 'from', 'to', 'delta_h_m', 'length_km', 'mean_gravity_ms2', 'observed_on', 'forward_m', 'backward_m'] as const;
const REQUIRED = ['from', 'to', 'length_km'] as const;
const MAX_ROWS = 100_000;

function bad(line: number, column: string, message: string): never {
  throw new Invalid(`Line ${line}, column ${column}: ${message}. Nothing was stored.`, [{ path: `file.line ${line}.${column}`, line, column, message }]);
}

const NUMBER = /^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$/;

export type ParsedSections = { name: string; sha256: string; rows: { input: SectionInput; line: number }[]; warnings: { line: number; message: string }[] };

const COLUMN_OF_FIELD = new Map<string, string>([
  ['lineName', 'line'], ['fromCode', 'from'], ['toCode', 'to'], ['deltaHeightM', 'delta_h_m'], ['lengthKm', 'length_km'],
  ['meanGravity_ms2', 'mean_gravity_ms2'], ['observedOn', 'observed_on'], ['forwardM', 'forward_m'], ['backwardM', 'backward_m'],
]);

/**
 * Reads the file part of a multipart request as a stream (busboy → csv-parse): hashes it, checks every row as it
 * arrives and keeps only the checked rows, so memory stays with the rows, not the file. Limits: the file size
 * (413), the line length (400 naming the line) and MAX_ROWS sections; parsing stops at the first bad line.
 */
export async function readSectionsUpload(req: Request, limits: { fileBytes: number; maxLineChars: number }): Promise<ParsedSections> {
  const { result } = await receiveMultipart(req, { fileBytes: limits.fileBytes }, (file, info) => parseSectionsStream(file, info.filename, limits));
  if (!result) throw new Invalid('No file in the upload.', [{ path: 'body.file', message: 'a file field is required' }]);
  return result;
}

export async function parseSectionsStream(file: Readable, name: string, limits: { fileBytes: number; maxLineChars: number }): Promise<ParsedSections> {
  const hash = crypto.createHash('sha256');
  let tooLarge = false;
  file.on('limit', () => (tooLarge = true));
  const hashing = new Transform({
    transform(chunk: Buffer, _enc, cb) {
      hash.update(chunk);
      cb(null, chunk);
    },
  });
  const parser = parse({ bom: true, comment: '#', skip_empty_lines: true, trim: true, info: true, relax_column_count: false, max_record_size: limits.maxLineChars });
  const rows: { input: SectionInput; line: number }[] = [];
  const warnings: { line: number; message: string }[] = [];
  let cols: string[] | null = null;
  let headerLine = 1;
  try {
    file.pipe(hashing).pipe(parser);
    file.on('error', (e) => parser.destroy(e));
    for await (const item of parser as AsyncIterable<{ record: string[]; info: { lines: number } }>) {
      const { record, info } = item;
      if (!cols) {
        cols = record.map((c) => c.trim().toLowerCase());
        headerLine = info.lines;
        checkHeader(cols, headerLine);
        continue;
      }
      if (rows.length >= MAX_ROWS) bad(info.lines, 'line', `more than ${MAX_ROWS} sections in one file`);
      rows.push(checkRow(new Map(cols.map((c, i) => [c, record[i] ?? ''])), info.lines));
    }
  } catch (e) {
    file.unpipe();
    file.resume(); // read the rest without parsing, so the client hears the answer
    if (tooLarge) throw new PayloadTooLarge(limits.fileBytes);
    if (e instanceof Invalid || e instanceof PayloadTooLarge) throw e;
    const err = e as { code?: string; lines?: number; message: string };
    if (err.code === 'CSV_MAX_RECORD_SIZE') bad(err.lines ?? 1, 'line', `longer than ${limits.maxLineChars} characters (the limit for one line)`);
    if (typeof err.code === 'string' && err.code.startsWith('CSV_')) bad(err.lines ?? 1, 'line', `not valid CSV (${err.message.replace(/^Invalid Record Length: /, '')})`);
    throw e;
  }
  if (tooLarge || (file as Readable & { truncated?: boolean }).truncated) throw new PayloadTooLarge(limits.fileBytes);
  if (!cols) bad(1, 'from', 'the file has no header line');
  if (rows.length === 0) bad(headerLine + 1, 'from', 'the file has no sections');
  return { name, sha256: hash.digest('hex'), rows, warnings };
}

function checkHeader(cols: string[], headerLine: number) {
  for (const c of cols) if (!(SECTION_COLUMNS as readonly string[]).includes(c)) bad(headerLine, c || '(empty)', `unknown column; allowed: ${SECTION_COLUMNS.join(', ')}`);
  for (const c of REQUIRED) if (!cols.includes(c)) bad(headerLine, c, 'required column missing');
  if (!cols.includes('delta_h_m') && !(cols.includes('forward_m') && cols.includes('backward_m'))) bad(headerLine, 'delta_h_m', 'give delta_h_m, or both forward_m and backward_m');
}

function checkRow(record: Map<string, string>, line: number): { input: SectionInput; line: number } {
  const num = (c: string, { required = false } = {}): number | null => {
    const v = record.get(c);
    if (v === undefined || v === '') {
      if (required) bad(line, c, 'value missing');
      return null;
    }
    if (!NUMBER.test(v)) bad(line, c, `"${v.slice(0, 40)}" is not a number (use a dot as decimal separator)`);
    return Number(v);
  };
  const forwardM = num('forward_m');
  const backwardM = num('backward_m');
  let deltaHeightM = num('delta_h_m');
  if (deltaHeightM === null) {
    if (forwardM === null || backwardM === null) bad(line, 'delta_h_m', 'value missing (and not both forward_m and backward_m given)');
    deltaHeightM = (forwardM - backwardM) / 2;
  }
  const candidate = {
    lineName: record.get('line') || null, fromCode: record.get('from') ?? '', toCode: record.get('to') ?? '', deltaHeightM,
    lengthKm: num('length_km', { required: true }), meanGravity_ms2: num('mean_gravity_ms2'),
    observedOn: record.get('observed_on') || null, forwardM, backwardM,
  };
  const parsed = sectionInputSchema.safeParse(candidate);
  if (!parsed.success) {
    const issue = parsed.error.issues[0];
    bad(line, COLUMN_OF_FIELD.get(String(issue.path[0])) ?? 'line', issue.message);
  }
  if (parsed.data.fromCode === parsed.data.toCode) bad(line, 'to', 'a section must join two different benchmarks');
  return { input: parsed.data, line };
}

export async function uploadSections(dataSource: DataSource, actor: Actor, file: ParsedSections, preview: boolean): Promise<SectionUploadResult> {
  authorize(actor, 'network:write');
  const { sha256, rows, warnings } = file;
  const service = createNetworkService(dataSource);
  const datums = await dataSource.getRepository(HeightDatumEntity).find();
  const kById = new Map(datums.map((d) => [d.id, d.sectionToleranceMmPerSqrtKm]));

  // Preview and store share the same checks; the preview's transaction is rolled back on purpose.
  const ROLLBACK = Symbol('preview');
  let out: SectionUploadResult | null = null;
  try {
    await dataSource.transaction(async (m) => {
      const dupe: { n: string }[] = await m.query('SELECT count(*) AS n FROM levelling_section WHERE upload_sha256 = $1', [sha256]);
      if (Number(dupe[0].n) > 0) throw new Conflict('This file was uploaded before; its sections are stored.', { sha256 });
      const previewRows = [];
      for (const r of rows) {
        const { from, values } = await service.sectionValues(m, r.input, `file.line ${r.line}`, r.line);
        const check = runCheck(values.forwardM, values.backwardM, values.lengthKm, kById.get(from.datumId) ?? 4);
        if (check.runCheckPassed === false) {
          warnings.push({ line: r.line, message: `forward and backward runs differ by ${check.runDifferenceMm!.toFixed(2)} mm, more than the tolerance ${check.runToleranceMm!.toFixed(2)} mm` });
        }
        previewRows.push({ ...r.input, line: r.line, meanGravity_ms2: values.meanGravity_ms2, gravityFromNormal: values.gravityFromNormal, runCheckPassed: check.runCheckPassed });
      }
      if (!preview) {
        await service.insertSectionRows(m, rows, sha256);
        await recordAudit(m, actor, { action: 'levelling-sections.uploaded', entityType: 'levelling-section', details: { fileName: file.name, sha256, rows: rows.length } });
      }
      out = { stored: !preview, rowCount: rows.length, sha256, rows: previewRows.slice(0, preview ? 200 : 50), warnings };
      if (preview) throw ROLLBACK;
    });
  } catch (e) {
    if (e !== ROLLBACK) throw e;
  }
  return out!;
}
