import type pg from 'pg';
import { to as copyTo } from 'pg-copy-streams';
import type { DataSource, EntityManager } from 'typeorm';
import type { ComparisonResultDto, ResultBody } from '../../shared/results';
import { resultCsvColumns } from '../../shared/results';
import type { Actor } from '../auth/actor';
import { canSeeCampaign } from '../auth/campaign-scope';
import { authorize } from '../auth/permissions';
import { recordAudit } from '../audit/audit.service';
import { getCampaignForResult, type CampaignForResult } from '../campaigns/campaigns.service';
import type { JobProgress } from '../../shared/jobs';
import { readProgress } from '../jobs/progress';
import { ComparisonResultEntity, type ComparisonResultRow } from '../db/entities/results.entities';
import { csvLine } from '../http/csv';
import { AppError, Conflict, NotFound } from '../http/errors';
import { SOFTWARE_CONSTANTS } from '../science/constants';
import { ScienceInputError } from '../science/errors';
import { readResultRequest, requestResultComputation } from './result-requests';
import { computeResultBody, inputHashOf, SOFTWARE_VERSION, type InputFile, type SampleArrays } from './compute-result';

// Campaign result: load inputs → compare the input hash with the newest stored result → reuse it or recompute and
// store a new row (history is kept). Computation runs in POSTs and jobs only (result-requests.ts, result-worker.ts):
// reading a result never writes; it answers the stored result for the current inputs or says why there is none.

export async function loadFiles(manager: EntityManager, campaignId: string): Promise<InputFile[]> {
  const rows: { id: string; file_name: string; sha256: string; row_count: number }[] = await manager.query(
    'SELECT id, file_name, sha256, row_count FROM ratio_series WHERE campaign_id = $1 ORDER BY created_at, id',
    [campaignId],
  );
  return rows.map((r) => ({ seriesId: r.id, name: r.file_name, sha256: r.sha256, sampleCount: Number(r.row_count) }));
}

type SeriesColumns = { epochMjd: Float64Array; y: Float64Array; valid: Uint8Array };

const COPY_SIGNATURE = Buffer.from('PGCOPY\n\xff\r\n\0', 'latin1');
const ROW_BYTES = 31; // int16 field count, then (int32 length + value) for float8, float8, bool

/**
 * Incremental parser of PostgreSQL's binary COPY output of (float8, float8, bool) rows (PostgreSQL docs, COPY,
 * "Binary Format"): chunks are parsed as they arrive into columns sized from the expected row count, so a series of
 * 10⁷ rows never exists twice in memory (once as chunks, once concatenated).
 */
export function createBinaryCopyReader(expectedRows = 0) {
  let cap = Math.max(expectedRows, 256);
  let epochMjd = new Float64Array(cap);
  let y = new Float64Array(cap);
  let valid = new Uint8Array(cap);
  let n = 0;
  let headerRead = false;
  let ended = false;
  let tail: Buffer | null = null;
  const grow = () => {
    cap *= 2;
    const e2 = new Float64Array(cap); e2.set(epochMjd); epochMjd = e2;
    const y2 = new Float64Array(cap); y2.set(y); y = y2;
    const v2 = new Uint8Array(cap); v2.set(valid); valid = v2;
  };
  return {
    push(chunk: Buffer): void {
      if (ended) return;
      const buf = tail ? Buffer.concat([tail, chunk]) : chunk;
      tail = null;
      let o = 0;
      if (!headerRead) {
        if (buf.length < 19) {
          tail = Buffer.from(buf);
          return;
        }
        if (!buf.subarray(0, 11).equals(COPY_SIGNATURE)) throw new Error('not a binary COPY stream');
        const ext = buf.readInt32BE(15);
        if (buf.length < 19 + ext) {
          tail = Buffer.from(buf);
          return;
        }
        o = 19 + ext;
        headerRead = true;
      }
      const view = new DataView(buf.buffer, buf.byteOffset, buf.byteLength);
      const len = buf.length;
      while (o + 2 <= len) {
        const fields = view.getInt16(o);
        if (fields === -1) {
          ended = true;
          return;
        }
        if (o + ROW_BYTES > len) break;
        if (fields !== 3 || view.getInt32(o + 2) !== 8 || view.getInt32(o + 14) !== 8 || view.getInt32(o + 26) !== 1) throw new Error('unexpected row layout in COPY stream');
        if (n === cap) grow();
        epochMjd[n] = view.getFloat64(o + 6);
        y[n] = view.getFloat64(o + 18);
        valid[n] = buf[o + 30];
        n++;
        o += ROW_BYTES;
      }
      if (o < len) tail = Buffer.from(buf.subarray(o));
    },
    finish(): SeriesColumns {
      if (!ended && (tail?.length ?? 0) > 0) throw new Error('the COPY stream ended inside a row');
      return { epochMjd: epochMjd.subarray(0, n), y: y.subarray(0, n), valid: valid.subarray(0, n) };
    },
  };
}

/** Parses a whole binary COPY output of (float8, float8, bool) rows at once. */
export function parseBinaryCopy(buf: Buffer): SeriesColumns {
  const r = createBinaryCopyReader(Math.floor(buf.length / ROW_BYTES));
  r.push(buf);
  return r.finish();
}

/** The rows in ascending epoch order: returned as they are when already ascending (the usual case), else sorted. */
export function inEpochOrder(c: SeriesColumns): SeriesColumns {
  const n = c.epochMjd.length;
  let ascending = true;
  for (let i = 1; i < n; i++) {
    if (!(c.epochMjd[i] > c.epochMjd[i - 1])) {
      ascending = false;
      break;
    }
  }
  if (ascending) return c;
  const order = Uint32Array.from({ length: n }, (_, i) => i).sort((a, b) => c.epochMjd[a] - c.epochMjd[b] || a - b);
  const out: SeriesColumns = { epochMjd: new Float64Array(n), y: new Float64Array(n), valid: new Uint8Array(n) };
  for (let k = 0; k < n; k++) {
    const i = order[k];
    out.epochMjd[k] = c.epochMjd[i];
    out.y[k] = c.y[i];
    out.valid[k] = c.valid[i];
  }
  return out;
}

/** Merges per-series columns (each ascending) into one ascending series; on equal epochs the earlier series comes first. */
function mergeSeries(parts: SeriesColumns[]): SampleArrays {
  if (parts.length === 1) return parts[0];
  const total = parts.reduce((s, p) => s + p.epochMjd.length, 0);
  const out: SampleArrays = { epochMjd: new Float64Array(total), y: new Float64Array(total), valid: new Uint8Array(total) };
  const at = parts.map(() => 0);
  for (let k = 0; k < total; k++) {
    let best = -1;
    for (let p = 0; p < parts.length; p++) {
      if (at[p] < parts[p].epochMjd.length && (best < 0 || parts[p].epochMjd[at[p]] < parts[best].epochMjd[at[best]])) best = p;
    }
    const i = at[best]++;
    out.epochMjd[k] = parts[best].epochMjd[i];
    out.y[k] = parts[best].y[i];
    out.valid[k] = parts[best].valid[i];
  }
  return out;
}

async function withPgClient<T>(manager: EntityManager, fn: (client: pg.ClientBase, inTransaction: boolean) => Promise<T>): Promise<T> {
  if (manager.queryRunner) return fn((await manager.queryRunner.connect()) as pg.ClientBase, manager.queryRunner.isTransactionActive);
  const qr = manager.connection.createQueryRunner();
  try {
    return await fn((await qr.connect()) as pg.ClientBase, false);
  } finally {
    await qr.release();
  }
}

/**
 * All samples of a campaign's uploads in epoch order (earlier upload first on a tie). Each series is read with a
 * binary COPY (no million row objects, doubles bit-exact) and parsed as it streams; the series are then merged.
 * A series is stored by one COPY in epoch order, so its rows come back in that order from a plain scan of its
 * partition: the query asks for no sort (which for 10⁷ rows spilled to disk), and the order is checked here, the
 * rare unordered read (a synchronised or parallel scan) being sorted in memory.
 */
export async function loadCampaignSamples(manager: EntityManager, campaignId: string, files?: InputFile[]): Promise<SampleArrays> {
  const series = files ?? (await loadFiles(manager, campaignId));
  const parts = await withPgClient(manager, async (client, inTransaction) => {
    // a scan that starts mid-table (synchronize_seqscans) or runs in parallel would return the rows out of order
    if (inTransaction) await client.query('SET LOCAL synchronize_seqscans = off; SET LOCAL max_parallel_workers_per_gather = 0');
    const out: SeriesColumns[] = [];
    for (const f of series) {
      // The id comes from our own table (a uuid), never from the request, so inlining it in COPY is safe.
      if (!/^[0-9a-f-]{36}$/.test(f.seriesId)) throw new Error('unexpected series id');
      const stream = client.query(copyTo(`COPY (SELECT mjd, y, valid FROM ratio_sample WHERE series_id = '${f.seriesId}') TO STDOUT (FORMAT binary)`));
      const reader = createBinaryCopyReader(f.sampleCount);
      for await (const chunk of stream) reader.push(chunk as Buffer);
      out.push(inEpochOrder(reader.finish()));
    }
    return out;
  });
  if (parts.length === 0) return { epochMjd: new Float64Array(0), y: new Float64Array(0), valid: new Uint8Array(0) };
  return mergeSeries(parts);
}

function toDto(row: ComparisonResultRow, fresh: boolean): ComparisonResultDto {
  return {
    id: row.id,
    campaignId: row.campaignId,
    inputHash: row.inputHash,
    softwareVersion: row.softwareVersion,
    constants: row.constants,
    computedAt: row.computedAt.toISOString(),
    computedBy: row.computedBy,
    fresh,
    result: row.result,
  };
}

/** The newest stored result of a campaign (whatever its inputs), or null — for the coordinator and certificate features. */
export async function latestResultForCampaign(manager: EntityManager, campaignId: string): Promise<ComparisonResultDto | null> {
  const row = await manager.getRepository(ComparisonResultEntity).findOne({ where: { campaignId }, order: { computedAt: 'DESC', id: 'DESC' } });
  return row ? toDto(row, false) : null;
}

/**
 * The parts of the campaign's newest stored result that the review rules read (server/campaigns/review-rules.ts), as
 * JSON (NULL when there is no result), for the campaign whose id is the SQL expression `campaignId`: the same row as
 * latestResultForCampaign(), without sending its whole body.
 */
export const latestResultForReviewSql = (campaignId: string) => `(SELECT jsonb_build_object('sideBySide', r.result->'sideBySide', 'geodesy', r.result->'geodesy', 'samples', r.result->'samples')
    FROM comparison_result r WHERE r.campaign_id = ${campaignId} ORDER BY r.computed_at DESC, r.id DESC LIMIT 1)`;

/** The stored result for the campaign's current inputs, or null; reads only, never computes. */
export async function storedCurrentResult(manager: EntityManager, campaignId: string): Promise<ComparisonResultDto | null> {
  const campaign = await getCampaignForResult(manager, campaignId);
  const inputHash = inputHashOf(campaign, await loadFiles(manager, campaignId));
  const latest = await latestResultForCampaign(manager, campaignId);
  return latest && latest.inputHash === inputHash ? latest : null;
}

export interface ComputeOptions {
  actor: Actor | null;
  /** Time of computation (the caller's clock). */
  now: Date;
  /** Recompute even when the stored result's input hash still matches. */
  force?: boolean;
  /** Told each stage as it starts (the worker records it as durable progress). */
  onStage?: (stage: string, fraction: number) => Promise<void>;
}

/**
 * The campaign's current result: the stored one if its input hash matches the current inputs (files, budget
 * versions, reference ratio, link, sites, software version), otherwise computed now and stored. Call inside a transaction.
 */
export async function computeCampaignResult(manager: EntityManager, campaignId: string, opts: ComputeOptions): Promise<ComparisonResultDto> {
  const campaign = await getCampaignForResult(manager, campaignId);
  const files = await loadFiles(manager, campaignId);
  const inputHash = inputHashOf(campaign, files);
  if (!opts.force) {
    const latest = await latestResultForCampaign(manager, campaignId);
    if (latest && latest.inputHash === inputHash) return latest;
  }
  if (files.length === 0) throw new Conflict('This campaign has no uploaded ratio series yet: upload data before asking for a result.');
  await opts.onStage?.('loading samples', 0.1);
  const samples = await loadCampaignSamples(manager, campaignId, files);
  let result: ResultBody;
  try {
    await opts.onStage?.('computing stability, tides and budget', 0.4);
    result = computeResultBody({ campaign, files, samples });
  } catch (e) {
    if (e instanceof ScienceInputError) throw new Conflict(`No result can be computed from this campaign's data: ${e.message}`);
    throw e;
  }
  const computedBy = opts.actor ? opts.actor.displayName : 'system';
  await opts.onStage?.('storing the result', 0.9);
  const inserted = await manager.getRepository(ComparisonResultEntity).save({
    campaignId, inputHash, constants: SOFTWARE_CONSTANTS as unknown as Record<string, unknown>, softwareVersion: SOFTWARE_VERSION,
    computedAt: opts.now, computedBy, result,
  });
  await recordAudit(manager, opts.actor, {
    action: 'result.computed', entityType: 'campaign', entityId: campaignId, instituteId: campaign.instituteId,
    details: { resultId: inserted.id, inputHash, forced: Boolean(opts.force), softwareVersion: SOFTWARE_VERSION, y: result.fractionalOffset.y, uY: result.fractionalOffset.standardUncertainty },
  });
  return toDto(inserted, true);
}

function requireCampaignVisible(actor: Actor, campaign: CampaignForResult): void {
  if (!canSeeCampaign(actor, { state: campaign.state, instituteId: campaign.instituteId, partnerInstituteId: campaign.clockB.instituteId })) throw new NotFound('Campaign');
}

/** The result as one CSV table (section, quantity, value, u, U(k=2), unit, note); numbers in shortest round-trip form. */
export function resultToCsv(dto: ComparisonResultDto): string {
  const r = dto.result;
  const rows: (string | number | null)[][] = [
    ['meta', 'campaign', r.campaign.name, null, null, '', r.campaign.id],
    ['meta', 'input_hash_sha256', dto.inputHash, null, null, '', ''],
    ['meta', 'software_version', dto.softwareVersion, null, null, '', ''],
    ['meta', 'computed_at', dto.computedAt, null, null, '', dto.computedBy],
    ['meta', 'tide_system', r.tide.system, null, null, '', r.tide.model],
    ['meta', 'w0_convention', r.w0Convention.value_m2s2, null, null, 'm2/s2', `${r.w0Convention.name}; ${r.w0Convention.source}`],
    ...r.inputFiles.map((f) => ['input_file', f.name, f.sha256, null, null, '', `${f.sampleCount} samples`]),
    ['samples', 'valid_samples', r.samples.valid, null, null, '', ''],
    ['samples', 'tau0', r.samples.tau0Seconds, null, null, 's', ''],
    ['samples', 'uptime_fraction', r.samples.uptimeFraction, null, null, '1', 'of the campaign period'],
    ['result', 'measured_ratio_mean', r.measuredRatio, null, null, '1', 'before the tide correction'],
    ['result', 'reference_ratio', r.referenceRatio.value, r.referenceRatio.relativeUncertainty, null, '1 (u relative)', r.referenceRatio.source],
    ['result', 'y_uncorrected', r.fractionalOffset.yUncorrected, null, null, '1', ''],
    ['result', 'tide_correction_mean_y', r.tide.meanCorrectionY, r.tide.modelUncertaintyY, null, '1', r.tide.uncertaintyRule],
    ['result', 'y', r.fractionalOffset.y, r.fractionalOffset.standardUncertainty, r.budget.expandedUncertainty, '1', 'tide-corrected'],
    ...r.budget.lines.map((l) => ['budget', l.component, l.sensitivity, l.standardUncertainty, null, l.unit, `type ${l.type}; contribution ${l.contribution}; ${l.note}`]),
    ['budget', 'combined', r.budget.combinedStandardUncertainty, r.budget.combinedStandardUncertainty, r.budget.expandedUncertainty, '1', r.budget.correlation],
    ['budget', 'coverage_factor_k', r.budget.coverageFactor, null, null, '1', r.budget.coverageRule],
    ['budget', 'coverage_probability_p', r.budget.coverageProbability, null, null, '1', ''],
    ['budget', 'effective_degrees_of_freedom', r.budget.effectiveDegreesOfFreedom ?? 'infinite', null, null, '1', 'Welch–Satterthwaite (JCGM 100:2008 G.4)'],
    ['result', 'delta_C', r.deltaC_m2s2.value, r.deltaC_m2s2.standardUncertainty, r.deltaC_m2s2.expandedUncertainty, 'm2/s2', `C_B − C_A; k = ${r.deltaC_m2s2.coverageFactor}`],
    ['result', 'delta_H', r.deltaH_m.value, r.deltaH_m.standardUncertainty, r.deltaH_m.expandedUncertainty, 'm', `H_B − H_A (normal heights); k = ${r.deltaH_m.coverageFactor}`],
    ...(r.geodesy
      ? [
          ['geodesy', 'delta_H_geodetic', r.geodesy.deltaH_m.value, r.geodesy.deltaH_m.standardUncertainty, r.geodesy.deltaH_m.expandedUncertainty, 'm', `${r.geodesy.source}; k = ${r.geodesy.deltaH_m.coverageFactor}`],
          ['geodesy', 'E_n', r.geodesy.en, null, null, '1', r.geodesy.agreed ? 'agreed (|E_n| ≤ 1)' : 'not agreed (|E_n| > 1)'],
        ]
      : []),
    ...r.otherTideSystems.map((o) => ['tide_system', `delta_C_${o.system}`, o.deltaC_m2s2, null, null, 'm2/s2', `delta_H ${o.deltaH_m} m`]),
    ...r.stability.points.map((p) => ['stability', `adev_tau_${p.tauSeconds}s`, p.adev, null, null, '1', `68% interval ${p.adevLow}…${p.adevHigh}; mdev ${p.mdev} (${p.mdevLow}…${p.mdevHigh}); hdev ${p.hdev}; totdev ${p.totdev}; noise ${p.noiseType} (${p.noiseMethod})`]),
    ...r.assumptions.map((a, i) => ['assumption', `assumption_${i + 1}`, a, null, null, '', '']),
  ];
  return [resultCsvColumns.join(','), ...rows.map(csvLine)].join('\n') + '\n';
}

/**
 * No current result to show (404 problem+json, code says why): `result-pending` while a computation is queued or
 * running (ask again after `retryAfterSeconds`), `result-failed` when the last one could not produce a result,
 * `result-not-computed` when nothing was asked for the current inputs yet.
 */
export class ResultNotReady extends AppError {
  constructor(code: 'result-pending' | 'result-failed' | 'result-not-computed', message: string, extra: Record<string, unknown>) {
    super(404, code, code === 'result-pending' ? 'Result being computed' : code === 'result-failed' ? 'Result could not be computed' : 'Result not computed', message, extra);
  }
}

export const RESULT_POLL_SECONDS = 2;

export function createResultsService(dataSource: DataSource, databaseUrl: string) {
  /** The stored result for the current inputs, or why there is none. Reads only: a GET never computes or writes. */
  async function current(actor: Actor, campaignId: string): Promise<ComparisonResultDto> {
    authorize(actor, 'campaigns:read');
    const m = dataSource.manager;
    const campaign = await getCampaignForResult(m, campaignId);
    requireCampaignVisible(actor, campaign);
    const files = await loadFiles(m, campaignId);
    const inputHash = inputHashOf(campaign, files);
    // The request first: a job marks it done only after its result is committed, so "done" here means the result
    // read next is there (read the other way round, a job finishing in between looked like "not computed").
    const request = await readResultRequest(m, campaignId);
    const latest = await latestResultForCampaign(m, campaignId);
    if (latest && latest.inputHash === inputHash) return latest;
    const extra = { campaignId, latestComputedAt: latest?.computedAt ?? null, request: request ? { state: request.state, reason: request.reason, requestedAt: request.requested_at.toISOString() } : null };
    if (request && (request.state === 'queued' || request.state === 'running')) {
      throw new ResultNotReady('result-pending', `The result is being computed (${request.state === 'running' ? 'running now' : 'waiting for a worker'}); ask again in a few seconds.`, { ...extra, retryAfterSeconds: RESULT_POLL_SECONDS });
    }
    if (request?.state === 'failed') throw new ResultNotReady('result-failed', `The last computation gave no result: ${request.error ?? 'unknown reason'}`, extra);
    throw new ResultNotReady('result-not-computed', files.length === 0
      ? 'This campaign has no uploaded ratio series yet: upload data, and the result is computed.'
      : latest
        ? 'The campaign’s inputs changed after its last result was computed; lab staff or the coordinator can ask for a new computation (Recompute).'
        : 'No result has been computed for this campaign yet; lab staff or the coordinator can ask for one (Recompute).', extra);
  }
  return {
    get: current,
    /** Puts a forced recomputation on the queue (202); the worker computes, stores and audits it. */
    recompute: async (actor: Actor, campaignId: string) => {
      authorize(actor, 'results:recompute');
      return dataSource.transaction(async (m) => {
        const campaign = await getCampaignForResult(m, campaignId);
        requireCampaignVisible(actor, campaign);
        if ((await loadFiles(m, campaignId)).length === 0) throw new Conflict('This campaign has no uploaded ratio series yet: upload data before asking for a result.');
        return requestResultComputation(m, databaseUrl, actor, campaignId, 'recompute');
      });
    },
    csv: async (actor: Actor, campaignId: string) => resultToCsv(await current(actor, campaignId)),
    /** How far the campaign's last result request got (stage and fraction from job_progress). Reads only. */
    progress: async (actor: Actor, campaignId: string): Promise<JobProgress> => {
      authorize(actor, 'campaigns:read');
      const m = dataSource.manager;
      requireCampaignVisible(actor, await getCampaignForResult(m, campaignId));
      const request = await readResultRequest(m, campaignId);
      if (!request) return { state: 'not-requested', stage: 'not asked for', fraction: 0, updatedAt: null, error: null, retryAfterSeconds: null };
      const p = await readProgress(m, 'result-compute', campaignId);
      const open = request.state === 'queued' || request.state === 'running';
      return {
        state: request.state,
        stage: request.state === 'done' ? 'finished' : request.state === 'failed' ? 'failed' : (p?.stage ?? (request.state === 'queued' ? 'waiting for a worker' : 'running')),
        fraction: request.state === 'done' ? 1 : open ? (p?.fraction ?? 0) : 0,
        updatedAt: (p?.updated_at ?? request.finished_at ?? request.started_at ?? request.requested_at).toISOString(),
        error: request.error,
        retryAfterSeconds: open ? RESULT_POLL_SECONDS : null,
      };
    },
  };
}
