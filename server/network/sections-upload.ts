import crypto from 'node:crypto';
import busboy from 'busboy';
import { parse } from 'csv-parse/sync';
import type { Request } from 'express';
import type { DataSource } from 'typeorm';
import { sectionInputSchema, type SectionInput, type SectionUploadResult } from '../../shared/network';
import { recordAudit } from '../audit/audit.service';
import type { Actor } from '../auth/actor';
import { authorize } from '../auth/permissions';
import { HeightDatumEntity } from '../db/entities/network.entities';
import { Conflict, Invalid, PayloadTooLarge } from '../http/errors';
import { createNetworkService, runCheck } from './network.service';

// Levelling-section CSV upload (format: docs/formats/levelling-sections.md). The whole file is checked before
// anything is stored; the first offending line and column are named; the rows go in one transaction.

/** Request field → CSV column, for naming the column at fault. */
const sectionColumns = new Map<string, string>([
  ['lineName', 'line'], ['fromCode', 'from'], ['toCode', 'to'], ['deltaHeightM', 'delta_h_m'], ['lengthKm', 'length_km'],
  ['meanGravity_ms2', 'mean_gravity_ms2'], ['observedOn', 'observed_on'], ['forwardM', 'forward_m'], ['backwardM', 'backward_m'],
]);
export const SECTION_COLUMNS = ['line', 'from', 'to', 'delta_h_m', 'length_km', 'mean_gravity_ms2', 'observed_on', 'forward_m', 'backward_m'] as const;
const REQUIRED = ['from', 'to', 'length_km'] as const;
const MAX_ROWS = 100_000;

/** Reads the one file field of a multipart body, up to the byte limit. */
export function readUploadedFile(req: Request, limitBytes: number): Promise<{ name: string; bytes: Buffer }> {
  return new Promise((resolve, reject) => {
    let bb: busboy.Busboy;
    try {
      bb = busboy({ headers: req.headers, limits: { files: 1, fileSize: limitBytes } });
    } catch {
      reject(new Invalid('Send the file as multipart/form-data in a field named "file".', [{ path: 'body.file', message: 'missing multipart body' }]));
      return;
    }
    let got: Promise<{ name: string; bytes: Buffer }> | null = null;
    bb.on('file', (_field, stream, info) => {
      got = new Promise((res, rej) => {
        const chunks: Buffer[] = [];
        stream.on('data', (c: Buffer) => chunks.push(c));
        stream.on('limit', () => rej(new PayloadTooLarge(limitBytes)));
        stream.on('end', () => res({ name: info.filename ?? 'upload.csv', bytes: Buffer.concat(chunks) }));
        stream.on('error', rej);
      });
    });
    bb.on('error', reject);
    bb.on('close', () => {
      if (!got) reject(new Invalid('No file in the upload.', [{ path: 'body.file', message: 'a file field is required' }]));
      else got.then(resolve, reject);
    });
    req.pipe(bb);
  });
}

function bad(line: number, column: string, message: string): never {
  throw new Invalid(`Line ${line}, column ${column}: ${message}. Nothing was stored.`, [{ path: `file.line ${line}.${column}`, line, column, message }]);
}

const NUMBER = /^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$/;

/** Parses and validates every row; throws at the first bad line with its column. */
export function parseSectionsCsv(bytes: Buffer): { rows: { input: SectionInput; line: number }[]; warnings: { line: number; message: string }[] } {
  const text = bytes.toString('utf8').replace(/^\uFEFF/, '');
  let records: { record: Record<string, string>; info: { lines: number } }[];
  try {
    records = parse(text, { columns: (h: string[]) => h.map((c) => c.trim().toLowerCase()), comment: '#', skip_empty_lines: true, trim: true, info: true, relax_column_count: false });
  } catch (e) {
    const err = e as { lines?: number; message: string };
    bad(err.lines ?? 1, 'line', `not valid CSV (${err.message.replace(/^Invalid Record Length: /, '')})`);
  }
  const header = text.split(/\r?\n/).find((l) => l.trim() && !l.trimStart().startsWith('#')) ?? '';
  const headerLine = text.split(/\r?\n/).findIndex((l) => l.trim() && !l.trimStart().startsWith('#')) + 1;
  const cols = header.split(',').map((c) => c.trim().toLowerCase());
  for (const c of cols) if (!(SECTION_COLUMNS as readonly string[]).includes(c)) bad(headerLine, c || '(empty)', `unknown column; allowed: ${SECTION_COLUMNS.join(', ')}`);
  for (const c of REQUIRED) if (!cols.includes(c)) bad(headerLine, c, 'required column missing');
  if (!cols.includes('delta_h_m') && !(cols.includes('forward_m') && cols.includes('backward_m'))) bad(headerLine, 'delta_h_m', 'give delta_h_m, or both forward_m and backward_m');
  if (records.length === 0) bad(headerLine + 1, 'from', 'the file has no sections');
  if (records.length > MAX_ROWS) bad(headerLine + MAX_ROWS + 1, 'line', `more than ${MAX_ROWS} sections in one file`);

  const warnings: { line: number; message: string }[] = [];
  const rows = records.map(({ record, info }) => {
    const line = info.lines;
    const num = (c: string, { required = false } = {}): number | null => {
      const v = record[c];
      if (v === undefined || v === '') {
        if (required) bad(line, c, 'value missing');
        return null;
      }
      if (!NUMBER.test(v)) bad(line, c, `"${v}" is not a number (use a dot as decimal separator)`);
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
      lineName: record.line || null, fromCode: record.from ?? '', toCode: record.to ?? '', deltaHeightM,
      lengthKm: num('length_km', { required: true }), meanGravity_ms2: num('mean_gravity_ms2'),
      observedOn: record.observed_on || null, forwardM, backwardM,
    };
    const parsed = sectionInputSchema.safeParse(candidate);
    if (!parsed.success) {
      const issue = parsed.error.issues[0];
      const column = sectionColumns.get(String(issue.path[0])) ?? 'line';
      bad(line, column, issue.message);
    }
    if (parsed.data.fromCode === parsed.data.toCode) bad(line, 'to', 'a section must join two different benchmarks');
    return { input: parsed.data, line };
  });
  return { rows, warnings };
}

export async function uploadSections(dataSource: DataSource, actor: Actor, file: { name: string; bytes: Buffer }, preview: boolean): Promise<SectionUploadResult> {
  authorize(actor, 'network:write');
  const sha256 = crypto.createHash('sha256').update(file.bytes).digest('hex');
  const { rows, warnings } = parseSectionsCsv(file.bytes);
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
