import { z } from 'zod';
import { stabilityPointSchema } from './calc';

// The comparison result of a campaign: every number with its uncertainty, the inputs' hash, the constants and the
// software version that produced it. Fractional quantities are dimensionless; units sit in the field names.

/** U = k·u with k = t_p(ν_eff) (JCGM 100:2008 G.4.1, G.6.4); ν_eff null when infinite. */
const expanded = z.object({
  value: z.number(),
  standardUncertainty: z.number().nonnegative(),
  expandedUncertainty: z.number().nonnegative(),
  coverageFactor: z.number().positive(),
  coverageProbability: z.number(),
  effectiveDegreesOfFreedom: z.number().nullable(),
});

const siteSchema = z.object({
  id: z.string(),
  name: z.string(),
  latitudeDeg: z.number(),
  longitudeDeg: z.number(),
  ellipsoidalHeightM: z.number(),
  quasigeoidHeightM: z.number(),
  /** Normal height H_N = h − ζ (or as registered), metres, with its standard uncertainty. */
  normalHeightM: z.number(),
  normalHeightUncertaintyM: z.number(),
});

const clockSchema = z.object({
  id: z.string(),
  name: z.string(),
  institute: z.string(),
  species: z.string(),
  speciesLabel: z.string(),
  nominalFrequencyHz: z.string(),
  site: siteSchema,
  budget: z.object({ id: z.string(), version: z.number().int(), totalCorrection: z.number(), totalUncertainty: z.number() }),
});

export const budgetLineSchema = z.object({
  component: z.string(),
  type: z.enum(['A', 'B']),
  /** Standard uncertainty u(x_i) of the input, in `unit`. */
  standardUncertainty: z.number().nonnegative(),
  /** GUM sensitivity coefficient c_i = ∂y/∂x_i. */
  sensitivity: z.number(),
  /** |c_i|·u(x_i), fractional frequency. */
  contribution: z.number().nonnegative(),
  /** Share of u_c² (0…1). */
  varianceShare: z.number(),
  unit: z.string(),
  note: z.string(),
});
export type BudgetLineDto = z.infer<typeof budgetLineSchema>;

export const seriesPointSchema = z.object({
  /** Mean epoch of the bucket's valid samples, MJD (UTC); the bucket's middle when it holds none. */
  mjd: z.number(),
  /** Mean measured y in the bucket (before the tide correction); null where the bucket holds no valid sample (a gap). */
  y: z.number().nullable(),
  yMin: z.number().nullable(),
  yMax: z.number().nullable(),
  /** Mean tidal part of y in the bucket, y_tide(B) − y_tide(A); the corrected series is y − tideY. Null in a gap. */
  tideY: z.number().nullable(),
  count: z.number().int(),
});

export const resultBodySchema = z.object({
  campaign: z.object({ id: z.string(), name: z.string(), periodStart: z.string(), periodEnd: z.string() }),
  clockA: clockSchema,
  clockB: clockSchema,
  link: z.object({ id: z.string(), name: z.string(), fibreLengthKm: z.number(), geodesicDistanceKm: z.number(), fractionalUncertainty: z.number() }),
  referenceRatio: z.object({ value: z.string(), relativeUncertainty: z.number(), source: z.string() }),
  inputFiles: z.array(z.object({ seriesId: z.string(), name: z.string(), sha256: z.string(), sampleCount: z.number().int() })),
  samples: z.object({
    total: z.number().int(),
    valid: z.number().int(),
    flaggedInvalid: z.number().int(),
    /** Grid slots without any sample (dead time between and inside uploads). */
    missingEpochs: z.number().int(),
    tau0Seconds: z.number(),
    firstEpochMjd: z.number().nullable(),
    lastEpochMjd: z.number().nullable(),
    averagingTimeSeconds: z.number(),
    /** Valid averaging time over the campaign period. */
    uptimeFraction: z.number(),
    /** Valid averaging time over the span from the first to the last sample. */
    uptimeOfSpanFraction: z.number(),
    note: z.string(),
  }),
  /** Mean of the measured ratio before the tide correction, R0·(1 + ȳ), 21 significant digits. */
  measuredRatio: z.string(),
  fractionalOffset: z.object({
    /** Mean y after the tide correction (the result). */
    y: z.number(),
    /** Mean y as measured (no tide correction). */
    yUncorrected: z.number(),
    standardUncertainty: z.number(),
    statisticalUncertainty: z.number().nullable(),
    statisticalMethod: z.string(),
    /** Degrees of freedom of the statistical uncertainty (EDF of the deviation it rests on). */
    statisticalDegreesOfFreedom: z.number().nullable(),
    statisticalModel: z.enum(['white-fm', 'phase-noise', 'flicker-fm-floor', 'random-walk-fm', 'none']),
    tauFitSeconds: z.number().nullable(),
    meanMethod: z.string(),
    /** y written with enough digits that its rounding stays below u/10. */
    yText: z.string(),
    /** Linear frequency drift, estimated and stated (not removed: the mean refers to the mean epoch either way). */
    drift: z.object({ slopePerDay: z.number(), standardUncertaintyPerDay: z.number(), referenceEpochMjd: z.number(), note: z.string() }).nullable(),
  }),
  tide: z.object({
    system: z.enum(['mean-tide', 'zero-tide', 'tide-free']),
    model: z.string(),
    /** Mean tidal part of y that was removed. */
    meanCorrectionY: z.number(),
    peakToPeakY: z.number(),
    modelUncertaintyY: z.number(),
    uncertaintyRule: z.string(),
  }),
  budget: z.object({
    outputQuantity: z.string(),
    lines: z.array(budgetLineSchema),
    combinedStandardUncertainty: z.number(),
    /** k = t_p(ν_eff), p = coverageProbability (95.45 %); 2 when ν_eff is infinite. */
    coverageFactor: z.number().positive(),
    coverageProbability: z.number(),
    expandedUncertainty: z.number(),
    effectiveDegreesOfFreedom: z.number().nullable(),
    coverageRule: z.string(),
    correlation: z.string(),
    systematicCorrections: z.string(),
  }),
  deltaC_m2s2: expanded,
  deltaH_m: expanded.extend({ method: z.string() }),
  geodesy: z.object({
    deltaH_m: expanded,
    source: z.string(),
    en: z.number(),
    agreed: z.boolean(),
    differenceM: z.number(),
    statement: z.string(),
  }).nullable(),
  otherTideSystems: z.array(z.object({ system: z.enum(['zero-tide', 'tide-free']), deltaC_m2s2: z.number(), deltaH_m: z.number() })),
  w0Convention: z.object({ name: z.string(), value_m2s2: z.number(), source: z.string(), note: z.string() }),
  stability: z.object({ tau0Seconds: z.number(), points: z.array(stabilityPointSchema), note: z.string() }),
  timeSeries: z.array(seriesPointSchema),
  method: z.object({ statement: z.string(), sources: z.array(z.string()) }),
  /**
   * Side-by-side campaigns only: the offset between the two clocks, y − ΔC_local/c², with the local tie it was
   * corrected for (standard uncertainties, k and p stated). Null (or absent in older results) for a remote campaign.
   */
  sideBySide: z.object({
    offset: z.number(),
    standardUncertainty: z.number(),
    expandedUncertainty: z.number(),
    coverageFactor: z.number(),
    coverageProbability: z.number(),
    yMeasured: z.number(),
    uYMeasured: z.number(),
    localDeltaC_m2s2: z.number(),
    localDeltaCUncertainty_m2s2: z.number(),
    localTieY: z.number(),
    localTieSource: z.string(),
    sites: z.object({ a: z.string(), b: z.string() }),
    formula: z.string(),
    sources: z.array(z.string()),
    offsetText: z.string(),
  }).nullable().optional(),
  /** What the result takes for granted: correlations, corrections applied by the labs, tide model, frames. */
  assumptions: z.array(z.string()),
  cautions: z.array(z.string()),
});
export type ResultBody = z.infer<typeof resultBodySchema>;

export const comparisonResultSchema = z.object({
  id: z.string().uuid(),
  campaignId: z.string().uuid(),
  inputHash: z.string(),
  softwareVersion: z.string(),
  constants: z.record(z.string(), z.unknown()),
  computedAt: z.string(),
  computedBy: z.string(),
  /** True when this answer was computed for this request (inputs changed or recomputation asked for). */
  fresh: z.boolean(),
  result: resultBodySchema,
});
export type ComparisonResultDto = z.infer<typeof comparisonResultSchema>;

export const resultCsvColumns = ['section', 'quantity', 'value', 'standard_uncertainty', 'expanded_uncertainty', 'unit', 'note'] as const;

/** A queued computation of a campaign's result (answer of POST …/result/recompute, 202). */
export const resultRequestSchema = z.object({
  campaignId: z.string().uuid(),
  state: z.literal('queued'),
  reason: z.enum(['upload', 'accept', 'recompute']),
  requestedAt: z.iso.datetime(),
});
export type ResultRequest = z.infer<typeof resultRequestSchema>;
/** Problem codes of GET …/result when there is no current result (404). */
export const resultNotReadyCodes = ['result-pending', 'result-failed', 'result-not-computed'] as const;
