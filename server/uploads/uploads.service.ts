import crypto from 'node:crypto';
import type { Request, Response } from 'express';
import type pg from 'pg';
import { from as copyFrom } from 'pg-copy-streams';
import type { DataSource } from 'typeorm';
import { columnMappingSchema, type RatioSeries, type SeriesPlot, type UploadPreview } from '../../shared/uploads';
import { recordAudit } from '../audit/audit.service';
import { actorLabel, type Actor } from '../auth/actor';
import { authorize } from '../auth/permissions';
import type { AppConfig } from '../config';
import { Conflict, Forbidden, Invalid, NotFound, PayloadTooLarge } from '../http/errors';
import { COPY_SAMPLES_SQL, finishCopy, ingestRatioSeries, type IngestSummary } from './ingest';
import { receiveMultipart } from './multipart';
import { faultPoint } from '../dev/fault-point';
import { openSpool } from './raw-file-spool';
import { openRawFileSession, type RawFileSession } from './raw-file-stream';
import { exportSamplesCsv } from './samples-export';
import { buildPreview } from './ratio-series-format';
import { coarsenOverview, decimateSeries } from './series-plot';
import { createUploadProgressStore } from './upload-progress';
import type { UploadProgress } from '../../shared/uploads';
import { requestResultComputation } from '../results/result-requests';
import { canSeeCampaign } from '../auth/campaign-scope';

const floatBytes = (a: Float64Array) => Buffer.from(a.buffer, a.byteOffset, a.byteLength);

// Uploads of frequency-ratio series: who may upload (lab staff of the campaign's owning institute, campaign draft or
// returned), the one transaction (COPY rows + raw file + series row + audit event), previews, lists and plot data.

export const PREVIEW_BYTES = 64 * 1024;
/** How long an upload waits for a second connection for its raw file before keeping it on its own connection. */
const RAW_CONNECTION_WAIT_MS = 1000;
const MS_PER_DAY = 86_400_000;
const toMjd = (d: Date) => d.getTime() / MS_PER_DAY + 40587;

type CampaignForUpload = {
  id: string;
  instituteId: string;
  clockBInstituteId: string | null;
  state: string;
  referenceRatio: string;
  periodStartMjd: number;
  periodEndMjd: number;
};

export async function loadCampaignForUpload(q: { query: (sql: string, params?: unknown[]) => Promise<unknown> }, id: string): Promise<CampaignForUpload | null> {
  const rows = (await q.query(
    `SELECT c.id, c.institute_id, c.state, c.reference_ratio, c.period_start, c.period_end, cb.institute_id AS clock_b_institute_id
       FROM campaign c LEFT JOIN clock cb ON cb.id = c.clock_b_id WHERE c.id = $1`,
    [id],
  )) as { id: string; institute_id: string; state: string; reference_ratio: string; period_start: Date; period_end: Date; clock_b_institute_id: string | null }[];
  const r = rows[0];
  if (!r) return null;
  return {
    id: r.id, instituteId: r.institute_id, clockBInstituteId: r.clock_b_institute_id, state: r.state, referenceRatio: r.reference_ratio,
    periodStartMjd: toMjd(new Date(r.period_start)), periodEndMjd: toMjd(new Date(r.period_end)),
  };
}

/** The campaigns' reading rule (server/auth/campaign-scope.ts). */
function canRead(actor: Actor, c: CampaignForUpload) {
  return canSeeCampaign(actor, { state: c.state, instituteId: c.instituteId, partnerInstituteId: c.clockBInstituteId });
}

function requireUploader(actor: Actor, c: CampaignForUpload) {
  if (actor.role !== 'operator' || actor.instituteId !== c.instituteId) {
    throw new Forbidden('Only lab staff of the institute that owns the campaign (clock A) upload its series.');
  }
  if (c.state !== 'draft' && c.state !== 'returned') {
    throw new Conflict(`Series can be added only while the campaign is a draft or returned; it is ${c.state.replace('_', ' ')}.`, { state: c.state });
  }
}

type SeriesDbRow = {
  id: string; campaign_id: string; file_name: string; sha256: string; byte_size: string; row_count: number; valid_count: number;
  first_mjd: number; last_mjd: number; uptime_fraction: number; tau0_seconds: number; mapping: Record<string, unknown>;
  invented: boolean; created_by: string; created_at: Date;
};

export function toSeriesDto(r: SeriesDbRow): RatioSeries {
  return {
    id: r.id, campaignId: r.campaign_id, fileName: r.file_name, sha256: r.sha256, byteSize: Number(r.byte_size),
    rowCount: r.row_count, validCount: r.valid_count, firstMjd: r.first_mjd, lastMjd: r.last_mjd,
    uptimeFraction: r.uptime_fraction, tau0Seconds: r.tau0_seconds, mapping: r.mapping, invented: r.invented,
    createdBy: r.created_by, createdAt: new Date(r.created_at).toISOString(),
  };
}

const SERIES_COLUMNS = 'id, campaign_id, file_name, sha256, byte_size, row_count, valid_count, first_mjd, last_mjd, uptime_fraction, tau0_seconds, mapping, invented, created_by, created_at';

/** One story for the detail, the listed issues and furtherProblems: how many in all, how many listed, the first. */
function problemMessage(s: IngestSummary): string {
  const first = s.issues[0];
  const total = s.issues.length + s.furtherProblems;
  const where = `line ${first.line}${first.column ? `, column ${first.column}` : ''}`;
  if (total === 1) return `The file was not stored: ${where}: ${first.message}. The whole file was checked and this is its only problem.`;
  const listed = s.furtherProblems > 0 ? `; the first ${s.issues.length} are listed, ${s.furtherProblems} more are not` : ', all listed';
  return `The file was not stored: ${total} problems in the whole file${listed}. The first: ${where}: ${first.message}.`;
}

export type StoreSeriesInput = {
  campaign: CampaignForUpload;
  fileName: string;
  source: NodeJS.ReadableStream & import('node:stream').Readable;
  fields: Record<string, string>;
  limitBytes: number;
  /** Reports progress of an HTTP upload (the shared progress store); absent for the seeder. */
  onProgress?: (p: Partial<UploadProgress>) => void;
  /** longest line accepted (default 64 KiB) */
  maxLineChars?: number;
  invented?: boolean;
  /** a second connection for the raw file, committed by the caller just before its own transaction (raw-file-stream.ts) */
  rawFile?: RawFileSession;
};

/**
 * The one write path for a series (HTTP uploads and the demo seeder): inside the caller's transaction on `client`,
 * COPY the rows, keep the raw file, insert the series row. Throws Invalid/PayloadTooLarge/Conflict; the caller
 * rolls back on any error.
 */
export async function storeSeries(client: pg.ClientBase, actor: Actor | null, input: StoreSeriesInput): Promise<SeriesDbRow> {
  const parsed = columnMappingSchema.safeParse(input.fields);
  if (!parsed.success) {
    input.source.resume();
    throw new Invalid('The column mapping is not valid.', parsed.error.issues.map((i) => ({ path: `body.${i.path.map(String).join('.')}`, message: i.message })));
  }
  const mapping = parsed.data;
  const raw = input.rawFile;
  const seriesId = raw ? raw.seriesId : crypto.randomUUID();
  const spool = raw ? null : openSpool();
  try {
    await faultPoint('before-copy');
    const copy = client.query(copyFrom(COPY_SAMPLES_SQL));
    raw?.start();
    let midCopy = false;
    let summary: IngestSummary;
    try {
      summary = await ingestRatioSeries(input.source, copy, {
        seriesId, mapping, referenceRatio: input.campaign.referenceRatio,
        periodStartMjd: input.campaign.periodStartMjd, periodEndMjd: input.campaign.periodEndMjd,
        limitBytes: input.limitBytes,
        maxLineChars: input.maxLineChars,
        onRawChunk: raw ? (c) => raw.write(c) : (c) => spool!.write(c),
        onProgress: (p) => {
          input.onProgress?.(p);
          // the kill harness stops here once some rows are in the COPY (no-op unless armed)
          if (!midCopy && p.rowsProcessed >= 20_000) {
            midCopy = true;
            return faultPoint('mid-copy');
          }
          return raw?.ready();
        },
      });
      // both COPYs end together: the raw file's runs on its own connection while PostgreSQL takes the last samples
      await Promise.all([finishCopy(copy), raw?.finish()]);
    } catch (e) {
      copy.destroy(e as Error);
      await raw?.rollback();
      throw e;
    }
    if (summary.tooLarge) throw new PayloadTooLarge(input.limitBytes);
    if (summary.issues.length > 0) throw new Invalid(problemMessage(summary), summary.issues, { furtherProblems: summary.furtherProblems });
    const existing = await client.query<{ id: string }>('SELECT id FROM ratio_series WHERE campaign_id = $1 AND sha256 = $2', [input.campaign.id, summary.sha256]);
    if (existing.rows[0]) {
      const id = existing.rows[0].id;
      throw new Conflict('This file was already uploaded to this campaign.', { existingUploadId: id, existingUpload: `/api/v1/uploads/${id}` });
    }
    input.onProgress?.({ phase: 'storing' });
    const storedMapping = { ...mapping, delimiter: summary.delimiter, hasHeader: summary.hasHeader, header: summary.header };
    const coarse = coarsenOverview(summary.overview, summary.overviewStats, summary.tau0Seconds);
    const { rows } = await client.query<SeriesDbRow>(
      `INSERT INTO ratio_series (id, campaign_id, file_name, sha256, byte_size, row_count, valid_count, first_mjd, last_mjd,
         uptime_fraction, tau0_seconds, mapping, invented, created_by_user_id, created_by, overview, overview_stats, overview_coarse, overview_coarse_stats)
       VALUES ($1,$2,$3,$4,$5,$6,$7,$8,$9,$10,$11,$12,$13,$14,$15,$16,$17,$18,$19) RETURNING ${SERIES_COLUMNS}`,
      [seriesId, input.campaign.id, input.fileName.slice(0, 250), summary.sha256, summary.byteSize, summary.rowCount, summary.validCount,
        summary.firstMjd, summary.lastMjd, summary.uptimeFraction, summary.tau0Seconds, JSON.stringify(storedMapping),
        input.invented ?? false, actor?.userId ?? null, actorLabel(actor), floatBytes(summary.overview), floatBytes(summary.overviewStats),
        floatBytes(coarse.overview), floatBytes(coarse.stats)],
    );
    if (spool) await spool.copyInto(client, seriesId);
    return rows[0];
  } finally {
    spool?.close();
  }
}

function isUniqueViolation(e: unknown) {
  return (e as { code?: string })?.code === '23505';
}

export function createUploadsService(deps: { dataSource: DataSource; config: Pick<AppConfig, 'uploadLimitBytes' | 'databaseUrl' | 'upload'> }) {
  const { dataSource, config } = deps;
  const uploadProgress = createUploadProgressStore(dataSource);

  async function campaignOr404(actor: Actor, id: string) {
    const c = await loadCampaignForUpload(dataSource, id);
    if (!c || !canRead(actor, c)) throw new NotFound('Campaign');
    return c;
  }
  async function seriesOr404(actor: Actor, id: string) {
    const rows = (await dataSource.query(`SELECT ${SERIES_COLUMNS} FROM ratio_series WHERE id = $1`, [id])) as SeriesDbRow[];
    if (!rows[0]) throw new NotFound('Upload');
    await campaignOr404(actor, rows[0].campaign_id);
    return rows[0];
  }
  function checkDeclaredSize(req: Request) {
    const declared = Number(req.headers['content-length']);
    // multipart framing and the mapping fields add a few kilobytes around the file itself
    if (Number.isFinite(declared) && declared > config.uploadLimitBytes + 64 * 1024) throw new PayloadTooLarge(config.uploadLimitBytes);
  }

  return {
    async preview(actor: Actor, campaignId: string, req: Request): Promise<UploadPreview> {
      authorize(actor, 'campaigns:write');
      requireUploader(actor, await campaignOr404(actor, campaignId));
      const { result } = await receiveMultipart(req, { fileBytes: config.uploadLimitBytes }, async (file, info) => {
        const parts: Buffer[] = [];
        let size = 0;
        for await (const chunk of file) {
          if (size >= PREVIEW_BYTES) continue; // the rest of the part is read and dropped
          const c = chunk as Buffer;
          parts.push(c.subarray(0, PREVIEW_BYTES - size));
          size += Math.min(c.length, PREVIEW_BYTES - size);
        }
        const head = Buffer.concat(parts);
        if (head.length === 0) throw new Invalid('The file is empty.', [{ path: 'file', line: 1, column: '1', message: 'the file is empty' }]);
        const text = new TextDecoder('utf-8').decode(head);
        const nul = text.indexOf('\0');
        const bad = text.indexOf('\uFFFD');
        const at = nul >= 0 ? nul : bad;
        // a multi-byte character cut at the 64 KiB edge is not an encoding fault
        if (at >= 0 && !(nul < 0 && at >= text.length - 2 && head.length >= PREVIEW_BYTES)) {
          const line = text.slice(0, at).split('\n').length;
          throw new Invalid('The file is not CSV text.', [{ path: 'file', line, message: nul >= 0 ? 'the file holds NUL bytes: it is a binary file' : 'the file is not valid UTF-8 text' }]);
        }
        return buildPreview(text, info.filename, head.length, size >= PREVIEW_BYTES);
      });
      if (!result) throw new Invalid('No file was sent.', [{ path: 'file', message: 'attach the file as the part named "file"' }]);
      return result;
    },

    async upload(actor: Actor, campaignId: string, req: Request, uploadId?: string): Promise<RatioSeries> {
      authorize(actor, 'campaigns:write');
      const campaign = await campaignOr404(actor, campaignId);
      requireUploader(actor, campaign);
      checkDeclaredSize(req);
      const declared = Number(req.headers['content-length']);
      if (uploadId) await uploadProgress.start(uploadId, actor.userId, Number.isFinite(declared) ? declared : null);
      const qr = dataSource.createQueryRunner();
      await qr.connect();
      const client = (qr as unknown as { databaseConnection: pg.PoolClient }).databaseConnection;
      let raw: RawFileSession | null = null;
      try {
        await qr.startTransaction();
        // PostgreSQL itself ends a COPY that a stalled or vanished client keeps open, whatever this process does.
        await client.query(`SET LOCAL statement_timeout = ${Math.trunc(config.upload.statementTimeoutMs)}`);
        raw = await openRawFileSession(dataSource, client, { statementTimeoutMs: config.upload.statementTimeoutMs, waitMs: RAW_CONNECTION_WAIT_MS });
        const rawFile = raw ?? undefined;
        const { result } = await receiveMultipart(req, { fileBytes: config.uploadLimitBytes, idleMs: config.upload.idleTimeoutMs }, async (file, info, fields) => {
          const row = await storeSeries(client, actor, { campaign, fileName: info.filename, source: file, fields, limitBytes: config.uploadLimitBytes, maxLineChars: config.upload.maxLineBytes, onProgress: (p) => uploadProgress.update(uploadId, p), rawFile });
          await recordAudit(qr.manager, actor, {
            action: 'campaign.series-uploaded', entityType: 'ratio_series', entityId: row.id, instituteId: campaign.instituteId,
            details: { campaignId, fileName: row.file_name, sha256: row.sha256, rows: row.row_count, valid: row.valid_count },
          });
          // the result is computed by a job queued in this transaction (never by a later GET)
          await requestResultComputation(qr.manager, config.databaseUrl, actor, campaignId, 'upload');
          return row;
        });
        if (!result) throw new Invalid('No file was sent.', [{ path: 'file', message: 'attach the file as the part named "file"' }]);
        await faultPoint('before-commit');
        // the raw file first: without its series row it is invisible, and this transaction's lock keeps it from the
        // sweep until the commit below (raw-file-stream.ts)
        await raw?.commit();
        await faultPoint('raw-file-committed');
        await qr.commitTransaction();
        await uploadProgress.finish(uploadId, { phase: 'done', seriesId: result.id });
        return toSeriesDto(result);
      } catch (e) {
        await uploadProgress.finish(uploadId, { phase: 'failed' });
        await raw?.rollback();
        if (qr.isTransactionActive) await qr.rollbackTransaction().catch(() => undefined);
        if (isUniqueViolation(e)) throw new Conflict('This file was already uploaded to this campaign (at the same moment).');
        throw e;
      } finally {
        raw?.release();
        await qr.release();
      }
    },

    async list(actor: Actor, campaignId: string): Promise<RatioSeries[]> {
      authorize(actor, 'campaigns:read');
      await campaignOr404(actor, campaignId);
      const rows = (await dataSource.query(`SELECT ${SERIES_COLUMNS} FROM ratio_series WHERE campaign_id = $1 ORDER BY created_at, id`, [campaignId])) as SeriesDbRow[];
      return rows.map(toSeriesDto);
    },

    async get(actor: Actor, id: string): Promise<RatioSeries> {
      authorize(actor, 'campaigns:read');
      return toSeriesDto(await seriesOr404(actor, id));
    },

    async plot(actor: Actor, id: string, q: { points: number; fromMjd?: number; toMjd?: number }): Promise<SeriesPlot> {
      authorize(actor, 'campaigns:read');
      const s = await seriesOr404(actor, id);
      return decimateSeries(dataSource, { id: s.id, firstMjd: s.first_mjd, lastMjd: s.last_mjd, rowCount: s.row_count }, q);
    },

    /** CSV of the stored samples with the epoch and value cells as uploaded (same reading rule as the upload itself). */
    async exportSamples(actor: Actor, id: string, res: Response): Promise<void> {
      authorize(actor, 'campaigns:read');
      const s = await seriesOr404(actor, id);
      const c = await campaignOr404(actor, s.campaign_id);
      await exportSamplesCsv(dataSource, { id: s.id, fileName: s.file_name, rowCount: s.row_count, mapping: s.mapping, referenceRatio: c.referenceRatio }, res);
    },

    async progress(actor: Actor, uploadId: string) {
      authorize(actor, 'campaigns:write');
      const p = await uploadProgress.get(uploadId, actor.userId);
      if (!p) throw new NotFound('Upload progress');
      return p;
    },
  };
}
