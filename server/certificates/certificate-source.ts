import type { EntityManager } from 'typeorm';
import { clockKindLabels, speciesLabels } from '../../shared/registry';
import type { ComparisonResultDto } from '../../shared/results';
import { C2_M2_PER_S2, C_M_PER_S } from '../science/constants';
import type { Actor } from '../auth/actor';
import { getCampaignForResult, markCampaignCertified, type CampaignForResult, type ClockForResult } from '../campaigns/campaigns.service';
import { InstituteEntity } from '../db/entities/core.entities';
import { Conflict } from '../http/errors';
import { computeCampaignResult, latestResultForCampaign, storedCurrentResult } from '../results/results.service';
import type { CertificateSource, SnapshotBody } from './certificate-source.types';

// Turns a campaign and its latest stored result into what a certificate shows. No number is recomputed here:
// the certificate states what the result says, converted only from fractional frequency to m²/s² (× c²).

const isoUtc = (s: string) => new Date(s).toISOString();

function clockPart(clock: ClockForResult, instituteName: string): SnapshotBody['clockA'] {
  return {
    name: clock.name,
    institute: instituteName,
    species: `${clockKindLabels[clock.kind]}, ${clock.species}`,
    transition: speciesLabels[clock.species],
    nominalFrequencyHz: clock.nominalFrequencyHz,
  };
}

/** Readable names, units and sources for the constants the results engine stores (server/science/constants.ts). */
const KNOWN_CONSTANTS: Record<string, { name: string; unit: string; source: string } | null> = {
  c_m_per_s: null, // printed first, with its source
  c2_m2_per_s2: { name: 'c²', unit: 'm²/s²', source: 'exact, from the defining value of c' },
  ellipsoid: { name: 'Reference ellipsoid', unit: '', source: 'H. Moritz, J Geod 74 (2000) 128–133' },
  'grs80.a_m': { name: 'GRS80 semi-major axis a', unit: 'm', source: 'GRS80 defining constant (Moritz 2000)' },
  'grs80.gm_m3_per_s2': { name: 'GRS80 GM', unit: 'm³/s²', source: 'GRS80 defining constant (Moritz 2000)' },
  'grs80.j2': { name: 'GRS80 J₂', unit: '', source: 'GRS80 defining constant (Moritz 2000)' },
  'grs80.omega_rad_per_s': { name: 'GRS80 ω', unit: 'rad/s', source: 'GRS80 defining constant (Moritz 2000)' },
  'grs80.gammaE_m_per_s2': { name: 'Normal gravity at the equator γₑ', unit: 'm/s²', source: 'GRS80 derived constant (Moritz 2000)' },
  'grs80.gammaP_m_per_s2': { name: 'Normal gravity at the pole γₚ', unit: 'm/s²', source: 'GRS80 derived constant (Moritz 2000)' },
  w0_ihrs_m2_per_s2: { name: 'W₀ of the IHRS', unit: 'm²/s²', source: 'IAG Resolution No. 1 (2015)' },
  l_g: { name: 'L_G (TT–TCG rate)', unit: '', source: 'IAU 2000 Resolution B1.9' },
  normalGravity: { name: 'Normal gravity model', unit: '', source: 'Heiskanen & Moritz, Physical Geodesy (1967)' },
};

const UNIT_SUFFIXES: [RegExp, string][] = [[/_m2_per_s2$/, 'm²/s²'], [/_m3_per_s2$/, 'm³/s²'], [/_m_per_s2$/, 'm/s²'], [/_m_per_s$/, 'm/s'], [/_rad_per_s$/, 'rad/s'], [/_m$/, 'm']];

/** Nested constants become one row each ("grs80.a_m"), named readably where we know them. */
function flattenConstants(value: unknown, key: string, out: (SnapshotBody['constants'][number] & { key: string })[]): void {
  if (value === null || value === undefined) return;
  if (typeof value === 'object' && !Array.isArray(value)) {
    for (const [k, v] of Object.entries(value as Record<string, unknown>)) flattenConstants(v, key ? `${key}.${k}` : k, out);
    return;
  }
  const known = Object.hasOwn(KNOWN_CONSTANTS, key) ? KNOWN_CONSTANTS[key] : undefined;
  if (known === null) return;
  const text = Array.isArray(value) ? value.join(', ') : String(value);
  out.push(known
    ? { key, name: known.name, value: text, unit: known.unit, source: known.source }
    : { key, name: key, value: text, unit: UNIT_SUFFIXES.find(([re]) => re.test(key))?.[1] ?? '', source: 'as stored with the result' });
}

function constantRows(result: ComparisonResultDto): SnapshotBody['constants'] {
  const rows: SnapshotBody['constants'] = [
    { name: 'Speed of light c', value: String(C_M_PER_S), unit: 'm/s', source: 'SI Brochure, 9th ed. (2019), defining constant' },
  ];
  // The stored JSON loses key order; print the known constants in our order, others after them.
  const stored: (SnapshotBody['constants'][number] & { key: string })[] = [];
  flattenConstants(result.constants, '', stored);
  const order = Object.keys(KNOWN_CONSTANTS);
  const rank = (key: string) => (order.includes(key) ? order.indexOf(key) : order.length);
  stored.sort((a, b) => rank(a.key) - rank(b.key) || a.key.localeCompare(b.key));
  rows.push(...stored.map(({ name, value, unit, source }) => ({ name, value, unit, source })));
  const r = result.result;
  rows.push({ name: 'Tide model', value: r.tide.model, unit: '', source: r.tide.uncertaintyRule });
  return rows.filter((row) => row.name && row.value && row.source);
}

export function snapshotBodyFrom(campaign: CampaignForResult, result: ComparisonResultDto, instituteNames: Map<string, string>): SnapshotBody {
  const r = result.result;
  const nameOf = (id: string, fallback: string) => instituteNames.get(id) ?? fallback;
  if (!r.geodesy) {
    throw new Conflict('The result holds no geodetic height difference to compare with, so no Eₙ can be stated; register the sites’ normal heights or a levelling value and recompute.');
  }
  const allan = r.stability.points
    .filter((p) => p.adev !== null && p.adevLow !== null && p.adevHigh !== null && p.adev > 0 && p.adevLow > 0 && p.adevLow <= p.adev && p.adev <= p.adevHigh)
    .map((p) => ({ tauSeconds: p.tauSeconds, adev: p.adev!, low: p.adevLow!, high: p.adevHigh! }));
  if (allan.length < 2) throw new Conflict('The result has fewer than two Allan-deviation points with confidence intervals; a certificate needs the stability plot.');
  const filledSeries = r.timeSeries.flatMap((p) => (p.y === null || p.tideY === null ? [] : [{ mjd: p.mjd, y: p.y - p.tideY }]));
  if (filledSeries.length < 2) throw new Conflict('The result has fewer than two time-series points; a certificate needs the series.');
  if (r.inputFiles.length === 0) throw new Conflict('The result names no input file; a certificate lists the SHA-256 of every uploaded series.');
  const mjd0 = Math.min(...filledSeries.map((p) => p.mjd));
  const participants = [...new Set([nameOf(campaign.clockA.instituteId, r.clockA.institute), nameOf(campaign.clockB.instituteId, r.clockB.institute)])];
  return {
    participants,
    clockA: clockPart(campaign.clockA, nameOf(campaign.clockA.instituteId, r.clockA.institute)),
    clockB: clockPart(campaign.clockB, nameOf(campaign.clockB.instituteId, r.clockB.institute)),
    fibreLink: { name: r.link.name, fibreLengthKm: r.link.fibreLengthKm, geodesicDistanceKm: r.link.geodesicDistanceKm },
    measurementPeriod: { start: isoUtc(r.campaign.periodStart), end: isoUtc(r.campaign.periodEnd) },
    uptimeFraction: Math.min(1, Math.max(0, r.samples.uptimeFraction)),
    measuredRatio: r.measuredRatio,
    referenceRatio: {
      value: r.referenceRatio.value,
      source: r.referenceRatio.relativeUncertainty > 0
        ? `${r.referenceRatio.source} (relative standard uncertainty ${r.referenceRatio.relativeUncertainty.toExponential(1)})`
        : `${r.referenceRatio.source} (exact by definition)`,
    },
    fractionalOffset: { y: r.fractionalOffset.y, standardUncertainty: r.fractionalOffset.standardUncertainty, yText: r.fractionalOffset.yText },
    deltaC_m2s2: expandedPart(r.deltaC_m2s2),
    deltaH_m: expandedPart(r.deltaH_m),
    geodeticComparison: {
      deltaHGeodesy_m: expandedPart(r.geodesy.deltaH_m),
      source: r.geodesy.source,
      En: r.geodesy.en,
      agreed: r.geodesy.agreed,
    },
    // The result's budget is in fractional frequency; ΔC = c²·y, so each |cᵢ|·u(xᵢ) scales by c² (GUM 5.1.3).
    budget: {
      outputUnit: 'm²/s²',
      rows: r.budget.lines.map((l) => ({
        component: l.component, type: l.type, standardUncertainty: l.standardUncertainty, sensitivity: l.sensitivity * C2_M2_PER_S2,
        // "1 (relative)" and the like are all dimensionless inputs; the table column is narrow.
        contribution: l.contribution * C2_M2_PER_S2, unit: /^1\b/.test(l.unit) || !l.unit ? '1' : l.unit,
      })),
      combinedStandardUncertainty: r.budget.combinedStandardUncertainty * C2_M2_PER_S2,
      coverageFactor: r.budget.coverageFactor,
      coverageProbability: r.budget.coverageProbability,
      effectiveDegreesOfFreedom: r.budget.effectiveDegreesOfFreedom,
    },
    allanDeviation: allan,
    timeSeries: filledSeries.map((p) => ({ tSeconds: (p.mjd - mjd0) * 86_400, y: p.y })),
    tideSystem: r.tide.system,
    w0Convention: { name: r.w0Convention.name, value_m2s2: r.w0Convention.value_m2s2, source: r.w0Convention.source },
    constants: constantRows(result),
    softwareVersion: /chronolevel/i.test(result.softwareVersion) ? result.softwareVersion : `Chronolevel ${result.softwareVersion}`,
    inputFiles: r.inputFiles.map((f) => ({ name: f.name, sha256: f.sha256 })),
    method: r.method,
    cautions: r.cautions,
    assumptions: r.assumptions,
  };
}

/** Value, U and the coverage statement (k, p, ν_eff) of a result quantity. */
function expandedPart(q: ComparisonResultDto['result']['deltaC_m2s2']): SnapshotBody['deltaC_m2s2'] {
  return {
    value: q.value, expandedUncertainty: q.expandedUncertainty, coverageFactor: q.coverageFactor,
    coverageProbability: q.coverageProbability, effectiveDegreesOfFreedom: q.effectiveDegreesOfFreedom,
  };
}

/**
 * The campaign and its current result, as the certificate engine needs them: the stored result when its input
 * hash still matches the campaign's inputs, otherwise one computed and stored now in the same transaction.
 */
export async function loadCertificateSource(manager: EntityManager, campaignId: string, actor: Actor, now: Date): Promise<CertificateSource> {
  const campaign = await getCampaignForResult(manager, campaignId);
  if (campaign.state !== 'accepted' && campaign.state !== 'certified') {
    throw new Conflict(`Only an accepted campaign can be certified; this one is '${campaign.state}'.`, { state: campaign.state });
  }
  const current = await computeCampaignResult(manager, campaignId, { actor, now });
  // Always build from the stored row, so a fresh computation and a later read give the same certificate body.
  const result = current.fresh ? await latestResultForCampaign(manager, campaignId) : current;
  if (!result || result.id !== current.id) throw new Conflict('The campaign’s result changed while the certificate was being prepared; try again.');
  return sourceFrom(manager, campaign, result);
}

/**
 * The same from the stored result only (reads, never computes): what the HTTP request checks a certificate request
 * against, so no science runs on the HTTP event loop. Null when no result is stored for the current inputs.
 */
export async function loadStoredCertificateSource(manager: EntityManager, campaignId: string): Promise<CertificateSource | null> {
  const campaign = await getCampaignForResult(manager, campaignId);
  if (campaign.state !== 'accepted' && campaign.state !== 'certified') {
    throw new Conflict(`Only an accepted campaign can be certified; this one is '${campaign.state}'.`, { state: campaign.state });
  }
  const result = await storedCurrentResult(manager, campaignId);
  if (!result) return null;
  return sourceFrom(manager, campaign, result);
}

async function sourceFrom(manager: EntityManager, campaign: Awaited<ReturnType<typeof getCampaignForResult>>, result: NonNullable<Awaited<ReturnType<typeof latestResultForCampaign>>>): Promise<CertificateSource> {
  const campaignId = campaign.id;
  const institutes = await manager.getRepository(InstituteEntity).find();
  const names = new Map(institutes.map((i) => [i.id, i.name]));
  return {
    campaignId,
    campaignLabel: campaign.name,
    campaignState: campaign.state,
    instituteAId: campaign.clockA.instituteId,
    instituteBId: campaign.clockB.instituteId,
    resultId: result.id,
    body: snapshotBodyFrom(campaign, result, names),
  };
}

export const markCertified = (manager: EntityManager, campaignId: string, actor: Actor) => markCampaignCertified(manager, campaignId, actor);
