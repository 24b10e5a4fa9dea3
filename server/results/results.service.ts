import type { DataSource, EntityManager } from 'typeorm';
import type { ComparisonResultDto, ResultBody } from '../../shared/results';
import { resultCsvColumns } from '../../shared/results';
import type { Actor } from '../auth/actor';
import { authorize, type Permission } from '../auth/permissions';
import { recordAudit } from '../audit/audit.service';
import { getCampaignForResult, type CampaignForResult } from '../campaigns/campaigns.service';
import { ComparisonResultEntity, type ComparisonResultRow } from '../db/entities/results.entities';
import { Conflict, NotFound } from '../http/errors';
import { SOFTWARE_CONSTANTS } from '../science/constants';
import { ScienceInputError } from '../science/errors';
import { computeResultBody, inputHashOf, SOFTWARE_VERSION, type InputFile, type SampleArrays } from './compute-result';

// Campaign result: load inputs → compare the input hash with the newest stored result → reuse it or recompute and
// store a new row (history is kept). Reading a result may therefore write one; the audit trail records each computation.

async function loadFiles(manager: EntityManager, campaignId: string): Promise<InputFile[]> {
  const rows: { id: string; file_name: string; sha256: string; row_count: number }[] = await manager.query(
    'SELECT id, file_name, sha256, row_count FROM ratio_series WHERE campaign_id = $1 ORDER BY created_at, id',
    [campaignId],
  );
  return rows.map((r) => ({ seriesId: r.id, name: r.file_name, sha256: r.sha256, sampleCount: Number(r.row_count) }));
}

function doublesFromBigEndian(buf: Buffer | null): Float64Array {
  if (!buf || buf.length === 0) return new Float64Array(0);
  const out = new Float64Array(buf.length / 8);
  const view = new DataView(buf.buffer, buf.byteOffset, buf.byteLength);
  for (let i = 0; i < out.length; i++) out[i] = view.getFloat64(8 * i, false);
  return out;
}

/**
 * All samples of a campaign's uploads in epoch order (earlier upload first on a tie). The three columns come back as
 * packed float8send() byte strings: one row instead of a million row objects, and the doubles arrive bit-exact.
 */
export async function loadCampaignSamples(manager: EntityManager, campaignId: string): Promise<SampleArrays> {
  const [row]: { e: Buffer | null; y: Buffer | null; v: Buffer | null }[] = await manager.query(
    `SELECT string_agg(float8send(s.mjd), ''::bytea ORDER BY s.mjd, r.created_at, r.id) AS e,
            string_agg(float8send(s.y), ''::bytea ORDER BY s.mjd, r.created_at, r.id) AS y,
            string_agg(CASE WHEN s.valid THEN '\\x01'::bytea ELSE '\\x00'::bytea END, ''::bytea ORDER BY s.mjd, r.created_at, r.id) AS v
       FROM ratio_sample s JOIN ratio_series r ON r.id = s.series_id
      WHERE r.campaign_id = $1`,
    [campaignId],
  );
  const valid = row?.v ? new Uint8Array(row.v.buffer, row.v.byteOffset, row.v.byteLength) : new Uint8Array(0);
  return { epochMjd: doublesFromBigEndian(row?.e ?? null), y: doublesFromBigEndian(row?.y ?? null), valid };
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

export interface ComputeOptions {
  actor: Actor | null;
  /** Time of computation (the caller's clock). */
  now: Date;
  /** Recompute even when the stored result's input hash still matches. */
  force?: boolean;
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
  const samples = await loadCampaignSamples(manager, campaignId);
  let result: ResultBody;
  try {
    result = computeResultBody({ campaign, files, samples });
  } catch (e) {
    if (e instanceof ScienceInputError) throw new Conflict(`No result can be computed from this campaign's data: ${e.message}`);
    throw e;
  }
  const computedBy = opts.actor ? opts.actor.displayName : 'system';
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
  // Operators see the campaigns their institute runs or takes part in; others see all (as the campaign list does).
  if (actor.role !== 'operator') return;
  const mine = [campaign.instituteId, campaign.clockA.instituteId, campaign.clockB.instituteId];
  if (!mine.includes(actor.instituteId ?? '')) throw new NotFound('Campaign');
}

const csvCell = (v: string | number | null | undefined): string => {
  const s = v === null || v === undefined ? '' : String(v);
  return /[",\n]/.test(s) ? `"${s.replace(/"/g, '""')}"` : s;
};

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
    ['result', 'delta_C', r.deltaC_m2s2.value, r.deltaC_m2s2.standardUncertainty, r.deltaC_m2s2.expandedUncertainty, 'm2/s2', 'C_B − C_A'],
    ['result', 'delta_H', r.deltaH_m.value, r.deltaH_m.standardUncertainty, r.deltaH_m.expandedUncertainty, 'm', 'H_B − H_A (normal heights)'],
    ...(r.geodesy
      ? [
          ['geodesy', 'delta_H_geodetic', r.geodesy.deltaH_m.value, r.geodesy.deltaH_m.standardUncertainty, r.geodesy.deltaH_m.expandedUncertainty, 'm', r.geodesy.source],
          ['geodesy', 'E_n', r.geodesy.en, null, null, '1', r.geodesy.agreed ? 'agreed (|E_n| ≤ 1)' : 'not agreed (|E_n| > 1)'],
        ]
      : []),
    ...r.otherTideSystems.map((o) => ['tide_system', `delta_C_${o.system}`, o.deltaC_m2s2, null, null, 'm2/s2', `delta_H ${o.deltaH_m} m`]),
    ...r.stability.points.map((p) => ['stability', `adev_tau_${p.tauSeconds}s`, p.adev, null, null, '1', `68% interval ${p.adevLow}…${p.adevHigh}; mdev ${p.mdev}; noise ${p.noiseType}`]),
  ];
  return [resultCsvColumns.join(','), ...rows.map((row) => row.map(csvCell).join(','))].join('\n') + '\n';
}

export function createResultsService(dataSource: DataSource) {
  async function run(actor: Actor, permission: Permission, campaignId: string, force: boolean) {
    authorize(actor, permission);
    return dataSource.transaction(async (m) => {
      requireCampaignVisible(actor, await getCampaignForResult(m, campaignId));
      return computeCampaignResult(m, campaignId, { actor, now: new Date(), force });
    });
  }
  return {
    get: (actor: Actor, campaignId: string) => run(actor, 'campaigns:read', campaignId, false),
    recompute: (actor: Actor, campaignId: string) => run(actor, 'results:recompute', campaignId, true),
    csv: async (actor: Actor, campaignId: string) => resultToCsv(await run(actor, 'campaigns:read', campaignId, false)),
  };
}
