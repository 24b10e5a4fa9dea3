import crypto from 'node:crypto';
import fs from 'node:fs';
import Decimal from 'decimal.js';
import type { BudgetLineDto, ResultBody } from '../../shared/results';
import type { CampaignForResult, ClockForResult } from '../campaigns/campaigns.service';
import { COVERAGE_PROBABILITY_K2, combineBudget, coverageFactorFor, type BudgetComponent } from '../science/uncertainty';
import { C2_M2_PER_S2, L_G, W0_IHRS_M2_PER_S2, W0_LG_M2_PER_S2 } from '../science/constants';
import { normalisedError } from '../science/agreement';
import { cFromNormalHeight, meanNormalGravity, normalHeightFromC } from '../science/normal-gravity';
import { potentialDifferenceFromY } from '../science/redshift';
import { fitLinearDrift, gridFromEpochs, kthSmallest, meanWithStatisticalUncertainty, stabilityAnalysis, type RegularGrid } from '../science/stability';
import { stabilityPointDto } from '../calc/calc.service';
import { coverageText, formatForUncertainty } from '../../shared/number-text';
import { convertPotentialDifference, TideBodyCache, tidePotentialSeries, type TideSystem } from '../science/tides';
import { ScienceInputError } from '../science/errors';
import { sideBySideOffset } from '../science/side-by-side';
import { registeredHeightDifference, TideSystemNotStated } from '../science/registered-heights';
import { formatScientific } from '../certificates/pdf/number-format';
import { faultPointSync } from '../dev/fault-point';

// The comparison result as a function of its inputs (campaign metadata + samples): no database, no clock reads
// (computedAt is the caller's). The service loads the inputs, hashes them and stores what this returns.

export const SOFTWARE_VERSION: string = (JSON.parse(fs.readFileSync(new URL('../../package.json', import.meta.url), 'utf8')) as { version: string }).version;

export interface SampleArrays {
  /** Ascending MJD (UTC). */
  epochMjd: Float64Array;
  y: Float64Array;
  /** 1 = valid, 0 = flagged. */
  valid: Uint8Array;
}

export interface InputFile {
  seriesId: string;
  name: string;
  sha256: string;
  sampleCount: number;
}

export interface ResultInputs {
  campaign: CampaignForResult;
  files: InputFile[];
  samples: SampleArrays;
}

/** The tide model's own uncertainty: 1 % of the correction's peak-to-peak, at least 1e-19 (our assumption; Love-number and ephemeris errors are well below 1 %). */
export const TIDE_MODEL_RELATIVE = 0.01;
export const TIDE_MODEL_FLOOR = 1e-19;
const MAX_SERIES_POINTS = 1500;

/**
 * Revision of the computation and of the stored result's shape within one software version; a stored result of an
 * older revision is recomputed. 2: τ0 snapped to the microsecond, empty series buckets kept as nulls. 3: noise identified
 * at each τ, u(ȳ) by noise type with its EDF, k = t_p(ν_eff), Hadamard/total deviation, assumptions. 4: registered
 * heights converted between tide systems, with the correlation model for ζ and h. 5: sites from the campaign
 * (where the clocks were deployed), side-by-side section with the offset corrected for the local tie.
 */
const RESULT_REVISION = 5;

/** Share of u_c² above which the reference-ratio term is said to dominate (more than half the variance). */
const REFERENCE_RATIO_DOMINANT_SHARE = 0.5;

/** SHA-256 over everything the result depends on except the sample values themselves (those enter through their files' SHA-256). */
export function inputHashOf(campaign: CampaignForResult, files: readonly InputFile[], softwareVersion = SOFTWARE_VERSION): string {
  const site = (c: ClockForResult) => {
    const s = c.site;
    return [s.id, s.latitudeDeg, s.longitudeDeg, s.ellipsoidalHeightM, s.quasigeoidHeightM, s.quasigeoidUncertaintyM, s.normalHeightM, s.normalHeightUncertaintyM, s.quasigeoidTideSystem ?? null, s.ellipsoidalCrustSystem ?? null, s.quasigeoidGridId ?? null];
  };
  const canonical = {
    series: files.map((f) => f.sha256).sort(),
    budgetVersionIds: [campaign.clockA.budget.id, campaign.clockB.budget.id],
    referenceRatio: [campaign.referenceRatio.value, campaign.referenceRatio.relativeUncertainty],
    link: [campaign.link.id, campaign.link.fractionalUncertainty],
    sites: [site(campaign.clockA), site(campaign.clockB)],
    period: [campaign.periodStart, campaign.periodEnd],
    role: [campaign.role, campaign.localTie?.deltaC_m2s2 ?? null, campaign.localTie?.uncertainty_m2s2 ?? null],
    softwareVersion,
    resultRevision: RESULT_REVISION,
  };
  return crypto.createHash('sha256').update(JSON.stringify(canonical)).digest('hex');
}

/** Drops a sample that repeats the previous epoch (two uploads covering the same second): the first one stays. */
function dropRepeatedEpochs(s: SampleArrays): { samples: SampleArrays; dropped: number } {
  let keep = 0;
  const n = s.epochMjd.length;
  let repeats = false;
  for (let i = 1; i < n && !repeats; i++) if (Math.abs(s.epochMjd[i] - s.epochMjd[i - 1]) < 1e-9) repeats = true;
  if (!repeats) return { samples: s, dropped: 0 }; // the usual case: no copy of 10⁷ samples
  const e = new Float64Array(n);
  const y = new Float64Array(n);
  const v = new Uint8Array(n);
  for (let i = 0; i < n; i++) {
    if (keep > 0 && Math.abs(s.epochMjd[i] - e[keep - 1]) < 1e-9) continue;
    e[keep] = s.epochMjd[i];
    y[keep] = s.y[i];
    v[keep] = s.valid[i];
    keep++;
  }
  return { samples: { epochMjd: e.subarray(0, keep), y: y.subarray(0, keep), valid: v.subarray(0, keep) }, dropped: n - keep };
}

function siteDto(c: ClockForResult) {
  const s = c.site;
  return {
    id: s.id, name: s.name, latitudeDeg: s.latitudeDeg, longitudeDeg: s.longitudeDeg, ellipsoidalHeightM: s.ellipsoidalHeightM,
    quasigeoidHeightM: s.quasigeoidHeightM, normalHeightM: s.normalHeightM, normalHeightUncertaintyM: s.normalHeightUncertaintyM,
  };
}

function clockDto(c: ClockForResult) {
  return {
    id: c.id, name: c.name, institute: c.instituteCode, species: c.species, speciesLabel: c.speciesLabel, nominalFrequencyHz: c.nominalFrequencyHz,
    site: siteDto(c),
    budget: { id: c.budget.id, version: c.budget.version, totalCorrection: c.budget.totalCorrection, totalUncertainty: c.budget.totalUncertainty },
  };
}

const fmtMm = (m: number) => `${m >= 0 ? '+' : '−'}${Math.abs(m * 1000).toFixed(1)} mm`;

/** Normal-height difference for a potential difference between two sites, each with its own latitude. */
function heightDifference(deltaC_m2s2: number, a: ClockForResult, b: ClockForResult): { deltaH_m: number; gammaBarB: number } {
  const cA = cFromNormalHeight(a.site.normalHeightM, a.site.latitudeDeg);
  const hB = normalHeightFromC(cA + deltaC_m2s2, b.site.latitudeDeg);
  return { deltaH_m: hB - a.site.normalHeightM, gammaBarB: meanNormalGravity(b.site.latitudeDeg, hB) };
}

function decimate(epochs: Float64Array, y: Float64Array, valid: Uint8Array, tideY: Float64Array): ResultBody['timeSeries'] {
  const n = epochs.length;
  if (n === 0) return [];
  const start = epochs[0];
  const span = Math.max(epochs[n - 1] - start, 1e-9);
  const buckets = Math.min(MAX_SERIES_POINTS, n);
  const sum = new Float64Array(buckets);
  const tide = new Float64Array(buckets);
  const tmid = new Float64Array(buckets);
  const min = new Float64Array(buckets).fill(Infinity);
  const max = new Float64Array(buckets).fill(-Infinity);
  const count = new Int32Array(buckets);
  for (let i = 0; i < n; i++) {
    if (valid[i] !== 1) continue;
    const b = Math.min(buckets - 1, Math.floor(((epochs[i] - start) / span) * buckets));
    sum[b] += y[i];
    tide[b] += tideY[i];
    tmid[b] += epochs[i] - start;
    if (y[i] < min[b]) min[b] = y[i];
    if (y[i] > max[b]) max[b] = y[i];
    count[b]++;
  }
  const out: ResultBody['timeSeries'] = [];
  for (let b = 0; b < buckets; b++) {
    // Empty buckets stay in the series as nulls so that plots break there instead of bridging the gap.
    if (count[b] === 0) {
      out.push({ mjd: start + ((b + 0.5) * span) / buckets, y: null, yMin: null, yMax: null, tideY: null, count: 0 });
      continue;
    }
    out.push({ mjd: start + tmid[b] / count[b], y: sum[b] / count[b], yMin: min[b], yMax: max[b], tideY: tide[b] / count[b], count: count[b] });
  }
  return out;
}

export function computeResultBody(inputs: ResultInputs): ResultBody {
  faultPointSync('result-compute'); // test-only kill point (server/dev/fault-point.ts); a no-op unless armed
  const { campaign, files } = inputs;
  const { samples, dropped } = dropRepeatedEpochs(inputs.samples);
  const { epochMjd, y, valid } = samples;
  const n = epochMjd.length;
  const a = campaign.clockA;
  const b = campaign.clockB;

  // Tidal part of each clock's y is −δW/c² (C = W0 − W); the comparison sees y_tide(B) − y_tide(A).
  const siteOf = (c: ClockForResult) => ({ latitudeDeg: c.site.latitudeDeg, longitudeDeg: c.site.longitudeDeg, ellipsoidalHeightM: c.site.ellipsoidalHeightM });
  // the Moon and Sun at the interpolation nodes are the same for both sites: computed once
  const bodies = new TideBodyCache();
  const wA = tidePotentialSeries(siteOf(a), epochMjd, { removePermanent: true, bodies });
  const wB = tidePotentialSeries(siteOf(b), epochMjd, { removePermanent: true, bodies });
  // the tidal y and the corrected y overwrite the two potential series in place (each value read before written)
  const tideY = wA;
  const corrected = wB;
  let tideMin = Infinity;
  let tideMax = -Infinity;
  let tideSum = 0;
  let ySum = 0;
  let validCount = 0;
  for (let i = 0; i < n; i++) {
    const t = (wA[i] - wB[i]) / C2_M2_PER_S2;
    tideY[i] = t;
    corrected[i] = y[i] - t;
    if (valid[i] === 1 && Number.isFinite(y[i])) {
      if (t < tideMin) tideMin = t;
      if (t > tideMax) tideMax = t;
      tideSum += t;
      ySum += y[i];
      validCount++;
    }
  }
  if (validCount < 3) throw new ScienceInputError('samples', 'the campaign needs at least three valid samples for a result');

  let grid: RegularGrid;
  let gridNote = 'Samples placed on a regular τ0 grid; missing epochs and flagged samples are gaps that no statistic bridges.';
  try {
    grid = gridFromEpochs(epochMjd, corrected, valid);
  } catch (e) {
    if (!(e instanceof ScienceInputError)) throw e;
    // Irregular epochs: the statistics then treat the valid samples as contiguous at the median spacing.
    const spacings = Float64Array.from({ length: n - 1 }, (_, i) => (epochMjd[i + 1] - epochMjd[i]) * 86_400);
    grid = { y: corrected, valid, tau0Seconds: kthSmallest(spacings, Math.floor((n - 1) / 2)), startMjd: epochMjd[0], missingEpochs: 0, invalidSamples: n - validCount };
    gridNote = `Epochs are not on a regular grid (${e.message}); the valid samples are treated as contiguous at the median spacing, which hides dead time from the stability analysis.`;
  }
  if (dropped > 0) gridNote += ` ${dropped} sample(s) repeating an epoch already present (overlapping uploads) were left out.`;
  const tau0 = grid.tau0Seconds;
  const points = stabilityAnalysis({ y: grid.y, valid: grid.valid, tau0Seconds: tau0 });
  const mean = meanWithStatisticalUncertainty({ y: grid.y, valid: grid.valid, tau0Seconds: tau0, points });
  const yMean = mean.mean;
  const yUncorrected = ySum / validCount;

  const tidePeakToPeak = tideMax - tideMin;
  const tideModelU = Math.max(TIDE_MODEL_RELATIVE * tidePeakToPeak, TIDE_MODEL_FLOOR);
  const components: (BudgetComponent & { note: string })[] = [
    {
      name: 'Statistical (frequency instability)', type: 'A', standardUncertainty: mean.statisticalUncertainty ?? 0, sensitivity: 1, unit: '1',
      degreesOfFreedom: mean.degreesOfFreedom ?? undefined, note: mean.method,
    },
    {
      name: `Clock A systematic (${a.name}, budget v${a.budget.version})`, type: 'B', standardUncertainty: a.budget.totalUncertainty, sensitivity: -1, unit: '1',
      note: 'y = ν_B/ν_A·(1/R0) − 1 falls as clock A’s frequency rises',
    },
    {
      name: `Clock B systematic (${b.name}, budget v${b.budget.version})`, type: 'B', standardUncertainty: b.budget.totalUncertainty, sensitivity: 1, unit: '1',
      note: 'total uncertainty of the pinned budget version',
    },
    { name: `Fibre link (${campaign.link.name})`, type: 'B', standardUncertainty: campaign.link.fractionalUncertainty, sensitivity: 1, unit: '1', note: 'registered link uncertainty' },
    {
      name: 'Reference ratio R0', type: 'B', standardUncertainty: campaign.referenceRatio.relativeUncertainty, sensitivity: -(1 + yMean), unit: '1 (relative)',
      note: `${campaign.referenceRatio.source}; ∂y/∂(ln R0) = −(1 + y)`,
    },
    {
      name: 'Tide model', type: 'B', standardUncertainty: tideModelU, sensitivity: 1, unit: '1',
      note: `max(${TIDE_MODEL_RELATIVE * 100} % of the correction’s peak-to-peak, ${formatScientific(TIDE_MODEL_FLOOR, 1)}) — our assumption`,
    },
  ];
  const budget = combineBudget(components, { coverageProbability: COVERAGE_PROBABILITY_K2 });
  const uY = budget.combinedStandardUncertainty;
  const k = budget.coverageFactor;
  const coverage = {
    coverageFactor: k,
    coverageProbability: COVERAGE_PROBABILITY_K2,
    effectiveDegreesOfFreedom: Number.isFinite(budget.effectiveDegreesOfFreedom) ? budget.effectiveDegreesOfFreedom : null,
  };
  // Registered heights carry no stated degrees of freedom: k = 2 (ν_eff infinite).
  const geodesyCoverage = { coverageFactor: coverageFactorFor(Infinity), coverageProbability: COVERAGE_PROBABILITY_K2, effectiveDegreesOfFreedom: null };
  const lines: BudgetLineDto[] = components.map((c, i) => ({
    component: c.name, type: c.type, standardUncertainty: c.standardUncertainty, sensitivity: c.sensitivity,
    contribution: budget.lines[i].contribution, varianceShare: budget.lines[i].varianceShare, unit: c.unit, note: c.note,
  }));

  const dc = potentialDifferenceFromY(yMean, uY);
  const uDc = dc.uDeltaC_m2s2 ?? 0;
  const h = heightDifference(dc.deltaC_m2s2, a, b);
  const uDh = uDc / h.gammaBarB;

  // Registered heights H = h − ζ, converted to this result's tide system (mean-tide) with the stated correlation model
  // (server/science/registered-heights.ts); a site whose tide systems are not stated is not compared.
  let geodesy: ResultBody['geodesy'] = null;
  const regSite = (c: ClockForResult) => ({
    latitudeDeg: c.site.latitudeDeg, ellipsoidalHeightM: c.site.ellipsoidalHeightM, ellipsoidalHeightUncertaintyM: c.site.ellipsoidalHeightUncertaintyM,
    ellipsoidalCrustSystem: c.site.ellipsoidalCrustSystem ?? null, quasigeoidHeightM: c.site.quasigeoidHeightM, quasigeoidUncertaintyM: c.site.quasigeoidUncertaintyM,
    quasigeoidTideSystem: c.site.quasigeoidTideSystem ?? null, quasigeoidGridId: c.site.quasigeoidGridId ?? null,
  });
  let geoTideNote: string | null = null;
  let reg: ReturnType<typeof registeredHeightDifference> | null = null;
  try {
    reg = registeredHeightDifference(regSite(a), regSite(b), campaign.link.geodesicDistanceKm, 'mean-tide');
  } catch (e) {
    if (!(e instanceof TideSystemNotStated)) throw e;
    geoTideNote = `No comparison with the registered heights: ${e.which.join('; ')} not stated. State the tide systems on the site pages (they are never assumed).`;
  }
  if (reg && (reg.standardUncertaintyM > 0 || uDh > 0)) {
    const geoDh = reg.deltaH_m;
    const uGeo = reg.standardUncertaintyM;
    const agreement = normalisedError(h.deltaH_m, k * uDh, geoDh, geodesyCoverage.coverageFactor * uGeo);
    geodesy = {
      deltaH_m: { value: geoDh, standardUncertainty: uGeo, expandedUncertainty: geodesyCoverage.coverageFactor * uGeo, ...geodesyCoverage },
      source: `registered normal heights of the two sites, H = h − ζ, converted to mean-tide (site A ${fmtMm(reg.conversionA_m)}, site B ${fmtMm(reg.conversionB_m)}); ${reg.statement}`,
      en: agreement.en,
      agreed: agreement.agreed,
      differenceM: agreement.difference,
      statement: agreement.agreed
        ? `Agreed: |Eₙ| = ${Math.abs(agreement.en).toFixed(2)} ≤ 1 — the clock and the geodetic height differences agree within their expanded uncertainties (clocks ${coverageText(coverage)}; geodesy k = 2).`
        : `Not agreed: |Eₙ| = ${Math.abs(agreement.en).toFixed(2)} > 1 — the clock and the geodetic height differences differ by more than their combined expanded uncertainty (clocks ${coverageText(coverage)}; geodesy k = 2).`,
    };
  }

  const otherTideSystems = (['zero-tide', 'tide-free'] as const).map((system: Exclude<TideSystem, 'mean-tide'>) => {
    const c = convertPotentialDifference(dc.deltaC_m2s2, a.site.latitudeDeg, b.site.latitudeDeg, 'mean-tide', system);
    return { system, deltaC_m2s2: c, deltaH_m: heightDifference(c, a, b).deltaH_m };
  });

  const periodSeconds = (Date.parse(campaign.periodEnd) - Date.parse(campaign.periodStart)) / 1000;
  const spanSeconds = n > 0 ? (epochMjd[n - 1] - epochMjd[0]) * 86_400 + tau0 : 0;
  const averagingTimeSeconds = validCount * tau0;
  const r0 = new Decimal(campaign.referenceRatio.value);
  const measuredRatio = r0.times(new Decimal(1).plus(new Decimal(yUncorrected))).toSignificantDigits(21).toFixed();

  let drift: ResultBody['fractionalOffset']['drift'] = null;
  if (validCount >= 3) {
    const d = fitLinearDrift(grid.y, tau0, grid.valid);
    drift = {
      slopePerDay: d.slopePerSecond * 86_400,
      standardUncertaintyPerDay: d.slopeUncertaintyPerSecond * 86_400,
      referenceEpochMjd: grid.startMjd + d.referenceEpochSeconds / 86_400,
      note: 'Least-squares slope of the tide-corrected y, stated and not removed: the mean refers to the mean epoch of the valid samples either way. Its uncertainty assumes white FM residuals and is too small under flicker or random-walk FM.',
    };
  }

  let sideBySide: ResultBody['sideBySide'] = null;
  if (campaign.role === 'side-by-side' && campaign.localTie) {
    const o = sideBySideOffset(yMean, uY, { deltaC_m2s2: campaign.localTie.deltaC_m2s2, uDeltaC_m2s2: campaign.localTie.uncertainty_m2s2 }, k);
    sideBySide = {
      offset: o.offset,
      standardUncertainty: o.standardUncertainty,
      expandedUncertainty: o.expandedUncertainty,
      coverageFactor: k,
      coverageProbability: COVERAGE_PROBABILITY_K2,
      yMeasured: o.yMeasured,
      uYMeasured: o.uYMeasured,
      localDeltaC_m2s2: campaign.localTie.deltaC_m2s2,
      localDeltaCUncertainty_m2s2: campaign.localTie.uncertainty_m2s2,
      localTieY: o.yLocal,
      localTieSource: campaign.localTie.source,
      sites: { a: a.site.name, b: b.site.name },
      formula: 'offset = y − ΔC_local/c², u² = u²(y) + (u(ΔC_local)/c²)² (uncorrelated inputs); ΔC_local = C(site B) − C(site A)',
      sources: ['Redshift relation y = ΔC/c² to first order (docs/science.md; IERS Conventions 2010, TN 36, ch. 10)', 'JCGM 100:2008 (GUM), eq. 10'],
      offsetText: formatForUncertainty(o.offset, o.standardUncertainty),
    };
  }

  const cautions: string[] = [];
  if (sideBySide) {
    cautions.push(`Side-by-side campaign: the result is the offset between ${b.name} and ${a.name} (corrected for the local tie), not a potential difference. The ΔC and ΔH figures below include that offset; the campaign does not enter the network adjustment or the reconciliation.`);
  }
  const referenceShare = budget.lines[4].varianceShare;
  if (referenceShare > REFERENCE_RATIO_DOMINANT_SHARE) {
    cautions.push(`The reference-ratio term dominates the combined uncertainty (${(100 * referenceShare).toFixed(0)} % of u_c²): the result is limited by the value of R0 (${campaign.referenceRatio.source}), not by the comparison.`);
  }
  if (mean.model === 'flicker-fm-floor' || mean.model === 'random-walk-fm') {
    cautions.push(`The comparison reaches a ${mean.model === 'flicker-fm-floor' ? 'flicker' : 'random-walk'} frequency-noise floor: the statistical uncertainty is a bound from the longest τ with adequate degrees of freedom, not an extrapolation.`);
  }
  if (mean.statisticalUncertainty === null) cautions.push('Too few samples for an Allan deviation: no statistical uncertainty is included.');
  if (!gridNote.startsWith('Samples placed')) cautions.push(gridNote);
  if (campaign.referenceRatio.justification) cautions.push(`Reference ratio chosen with justification: ${campaign.referenceRatio.justification}`);
  if (averagingTimeSeconds / Math.max(periodSeconds, 1) < 0.5) cautions.push(`Uptime is ${((100 * averagingTimeSeconds) / periodSeconds).toFixed(1)} % of the campaign period.`);
  if (geoTideNote) cautions.push(geoTideNote);
  if (geodesy && !geodesy.agreed) cautions.push('The clock result does not agree with the geodetic height difference (|Eₙ| > 1): check both before using either.');

  return {
    campaign: { id: campaign.id, name: campaign.name, periodStart: campaign.periodStart, periodEnd: campaign.periodEnd },
    clockA: clockDto(a),
    clockB: clockDto(b),
    link: { id: campaign.link.id, name: campaign.link.name, fibreLengthKm: campaign.link.fibreLengthKm, geodesicDistanceKm: campaign.link.geodesicDistanceKm, fractionalUncertainty: campaign.link.fractionalUncertainty },
    referenceRatio: { value: campaign.referenceRatio.value, relativeUncertainty: campaign.referenceRatio.relativeUncertainty, source: campaign.referenceRatio.source },
    inputFiles: files,
    samples: {
      total: n + dropped,
      valid: validCount,
      flaggedInvalid: n - validCount,
      missingEpochs: grid.missingEpochs,
      tau0Seconds: tau0,
      firstEpochMjd: n > 0 ? epochMjd[0] : null,
      lastEpochMjd: n > 0 ? epochMjd[n - 1] : null,
      averagingTimeSeconds,
      uptimeFraction: periodSeconds > 0 ? Math.min(1, averagingTimeSeconds / periodSeconds) : 0,
      uptimeOfSpanFraction: spanSeconds > 0 ? Math.min(1, averagingTimeSeconds / spanSeconds) : 0,
      note: gridNote,
    },
    measuredRatio,
    fractionalOffset: {
      y: yMean,
      yUncorrected,
      standardUncertainty: uY,
      statisticalUncertainty: mean.statisticalUncertainty,
      statisticalMethod: mean.method,
      statisticalDegreesOfFreedom: mean.degreesOfFreedom,
      statisticalModel: mean.model,
      tauFitSeconds: mean.tauFitSeconds,
      yText: formatForUncertainty(yMean, uY),
      drift,
      meanMethod: 'Arithmetic mean of the valid tide-corrected samples: every sample stands for the same τ0, so equal weights are the weighted mean.',
    },
    tide: {
      system: 'mean-tide',
      model:
        'Periodic solid-Earth tide at each clock: degree-2 Moon and Sun potential × (1 + k2 − h2) = 0.68745 (IERS Conventions 2010 ch. 6–7), permanent part left in (mean-tide, as the IHRS); the tidal part of y, y_tide(B) − y_tide(A) with y_tide = −δW/c², is subtracted sample by sample before averaging.',
      meanCorrectionY: tideSum / validCount,
      peakToPeakY: tidePeakToPeak,
      modelUncertaintyY: tideModelU,
      uncertaintyRule: `u = max(${TIDE_MODEL_RELATIVE * 100} % of the peak-to-peak correction, ${formatScientific(TIDE_MODEL_FLOOR, 1)}) (our assumption; ocean loading and atmospheric effects are not modelled)`,
    },
    budget: {
      outputQuantity: 'fractional frequency offset y (dimensionless)',
      lines,
      combinedStandardUncertainty: uY,
      ...coverage,
      expandedUncertainty: budget.expandedUncertainty,
      coverageRule: `k = t_p(ν_eff) for p = 95.45 %, ν_eff by Welch–Satterthwaite truncated to an integer (JCGM 100:2008 G.4.1, G.6.4); k = 2 when ν_eff is infinite. Here ${coverageText(coverage)}.`,
      correlation: budget.correlation,
      systematicCorrections:
        'Uploaded ratios are taken as reported by the labs, i.e. with each clock’s systematic corrections already applied (common practice); the budget totals enter as uncertainties only and the correction totals are listed for traceability.',
    },
    deltaC_m2s2: { value: dc.deltaC_m2s2, standardUncertainty: uDc, expandedUncertainty: k * uDc, ...coverage },
    deltaH_m: {
      value: h.deltaH_m, standardUncertainty: uDh, expandedUncertainty: k * uDh, ...coverage,
      method: 'H_B = C_B/γ̄_B with C_B = C_A + ΔC and C_A = H_A·γ̄_A (GRS80 mean normal gravity along each normal plumb line, Heiskanen & Moritz 1967 eq. 4-42); ΔH = H_B − H_A (normal heights).',
    },
    geodesy,
    sideBySide,
    otherTideSystems,
    w0Convention: {
      name: 'IHRS W0 (heights)',
      value_m2s2: W0_IHRS_M2_PER_S2,
      source: 'IAG Resolution No. 1 (2015)',
      note: `ΔC = C_B − C_A does not depend on W0; the normal heights use the IHRS W0. Time scales use L_G = ${formatScientific(L_G, 10)} (IAU 2000 B1.9), i.e. W0 = c²·L_G = ${W0_LG_M2_PER_S2.toFixed(1)} m²/s², which is not used here.`,
    },
    stability: {
      tau0Seconds: tau0,
      points: points.map(stabilityPointDto),
      note: `Tide-corrected y on the τ0 grid with gaps (NIST SP 1065 §5.2, overlapping estimators; 68.3 % intervals with the Greenhall–Riley EDF for the noise found at each τ). ${gridNote}`,
    },
    timeSeries: decimate(epochMjd, y, valid, tideY),
    method: {
      statement:
        'y = R/R0 − 1 per sample (decimal arithmetic), periodic tide removed per sample, mean over valid samples, statistical uncertainty of the mean from the noise identified at each τ (white FM fitted over all white-FM τ; flicker or random-walk FM floors bounded at the longest τ with adequate EDF), GUM budget with uncorrelated inputs and k = t_p(ν_eff), ΔC = c²·y (first order), ΔH via GRS80 mean normal gravity, Eₙ against the sites’ registered normal heights (geodesy).',
      sources: [
        'IEEE Std 1139-2008; NIST SP 1065 (Riley 2008)',
        'Greenhall & Riley 2003, Uncertainty of stability variances based on finite differences (35th PTTI)',
        'JCGM 100:2008 (GUM), G.4 and G.6.4',
        'IERS Conventions 2010 (TN 36), ch. 6–7',
        'Moritz 2000, Geodetic Reference System 1980, J Geod 74',
        'Heiskanen & Moritz 1967, Physical Geodesy, ch. 4',
        'ISO 13528:2015 §9.7 / ISO/IEC 17043:2010 Annex B (Eₙ)',
        'IAG Resolution No. 1 (2015), IHRS',
      ],
    },
    assumptions: [
      'All budget inputs are taken as uncorrelated (JCGM 100:2008 eq. 10): the statistical part, both clock systematics, the fibre link, the reference ratio and the tide model.',
      'The uploaded ratios carry each lab’s systematic corrections already applied; the budget totals enter as uncertainties only.',
      `Periodic solid-Earth tide removed with the IERS 2010 degree-2 model (permanent part kept, mean-tide); its own uncertainty is max(${TIDE_MODEL_RELATIVE * 100} % of the peak-to-peak correction, ${formatScientific(TIDE_MODEL_FLOOR, 1)}); ocean loading and atmospheric effects are not modelled.`,
      'Site coordinates, ellipsoidal heights, quasigeoid heights and normal heights are taken to refer to coincident reference frames and epochs; no frame transformation or station motion is applied.',
      'Registered normal heights are taken as mean-tide.',
      'The statistical uncertainty rests on the noise type identified at each τ; for a flicker or random-walk FM floor it is a bound for the mean over this record.',
      'ΔC = c²·y to first order in 1/c² (terms of order 10⁻¹⁸·y are neglected).',
    ],
    cautions,
  };
}

