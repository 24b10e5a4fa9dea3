import type { EntityManager } from 'typeorm';
import { clockKindLabels, speciesLabels } from '../../shared/registry';
import type { ComparisonResultDto } from '../../shared/results';
import { C2_M2_PER_S2, C_M_PER_S } from '../science/constants';
import type { Actor } from '../auth/actor';
import { getCampaignForResult, markCampaignCertified, type CampaignForResult, type ClockForResult } from '../campaigns/campaigns.service';
import { InstituteEntity } from '../db/entities/core.entities';
import { Conflict } from '../http/errors';
import { computeCampaignResult, latestResultForCampaign } from '../results/results.service';
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

function constantRows(result: ComparisonResultDto): SnapshotBody['constants'] {
  const rows: SnapshotBody['constants'] = [
    { name: 'Speed of light c', value: String(C_M_PER_S), unit: 'm/s', source: 'SI Brochure, 9th ed. (2019), defining constant' },
  ];
  for (const [name, value] of Object.entries(result.constants)) {
    if (value && typeof value === 'object' && 'value' in value) {
      const v = value as { value: unknown; unit?: unknown; source?: unknown };
      rows.push({ name, value: String(v.value), unit: typeof v.unit === 'string' ? v.unit : '', source: typeof v.source === 'string' && v.source ? v.source : 'as stored with the result' });
    } else if (value !== null && value !== undefined) {
      rows.push({ name, value: typeof value === 'object' ? JSON.stringify(value) : String(value), unit: '', source: 'as stored with the result' });
    }
  }
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
  if (r.timeSeries.length < 2) throw new Conflict('The result has fewer than two time-series points; a certificate needs the series.');
  if (r.inputFiles.length === 0) throw new Conflict('The result names no input file; a certificate lists the SHA-256 of every uploaded series.');
  const mjd0 = Math.min(...r.timeSeries.map((p) => p.mjd));
  const participants = [...new Set([nameOf(campaign.clockA.instituteId, r.clockA.institute), nameOf(campaign.clockB.instituteId, r.clockB.institute)])];
  return {
    participants,
    clockA: clockPart(campaign.clockA, nameOf(campaign.clockA.instituteId, r.clockA.institute)),
    clockB: clockPart(campaign.clockB, nameOf(campaign.clockB.instituteId, r.clockB.institute)),
    fibreLink: { name: r.link.name, fibreLengthKm: r.link.fibreLengthKm, geodesicDistanceKm: r.link.geodesicDistanceKm },
    measurementPeriod: { start: isoUtc(r.campaign.periodStart), end: isoUtc(r.campaign.periodEnd) },
    uptimeFraction: Math.min(1, Math.max(0, r.samples.uptimeFraction)),
    measuredRatio: r.measuredRatio,
    referenceRatio: { value: r.referenceRatio.value, source: `${r.referenceRatio.source} (relative standard uncertainty ${r.referenceRatio.relativeUncertainty.toExponential(1)})` },
    fractionalOffset: { y: r.fractionalOffset.y, standardUncertainty: r.fractionalOffset.standardUncertainty },
    deltaC_m2s2: { value: r.deltaC_m2s2.value, expandedUncertainty: r.deltaC_m2s2.expandedUncertainty, coverageFactor: 2 },
    deltaH_m: { value: r.deltaH_m.value, expandedUncertainty: r.deltaH_m.expandedUncertainty, coverageFactor: 2 },
    geodeticComparison: {
      deltaHGeodesy_m: { value: r.geodesy.deltaH_m.value, expandedUncertainty: r.geodesy.deltaH_m.expandedUncertainty, coverageFactor: 2 },
      source: r.geodesy.source,
      En: r.geodesy.en,
      agreed: r.geodesy.agreed,
    },
    // The result's budget is in fractional frequency; ΔC = c²·y, so each |cᵢ|·u(xᵢ) scales by c² (GUM 5.1.3).
    budget: {
      outputUnit: 'm²/s²',
      rows: r.budget.lines.map((l) => ({
        component: l.component, type: l.type, standardUncertainty: l.standardUncertainty, sensitivity: l.sensitivity * C2_M2_PER_S2,
        contribution: l.contribution * C2_M2_PER_S2, unit: l.unit || '1',
      })),
      combinedStandardUncertainty: r.budget.combinedStandardUncertainty * C2_M2_PER_S2,
    },
    allanDeviation: allan,
    timeSeries: r.timeSeries.map((p) => ({ tSeconds: (p.mjd - mjd0) * 86_400, y: p.y - p.tideY })),
    tideSystem: r.tide.system,
    w0Convention: { name: r.w0Convention.name, value_m2s2: r.w0Convention.value_m2s2, source: r.w0Convention.source },
    constants: constantRows(result),
    softwareVersion: result.softwareVersion,
    inputFiles: r.inputFiles.map((f) => ({ name: f.name, sha256: f.sha256 })),
    method: r.method,
    cautions: r.cautions,
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
