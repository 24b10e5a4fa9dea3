import { z } from 'zod';
import { nameText, pageQuerySchema, sortableBy } from './http';

// The levelling network's API contract: height datums, benchmarks, levelling sections, loops, adjustment runs,
// reconciliation with clock results, the map, and the stateless adjustment calculator.

export const tideSystems = ['mean-tide', 'zero-tide', 'tide-free'] as const;
export const tideSystemSchema = z.enum(tideSystems);

/** Loop tolerance 4 mm/√km: FGCC (1984), Standards and Specifications for Geodetic Control Networks, §3.5, loop closure of first-order class I levelling (value from memory). */
export const DEFAULT_LOOP_TOLERANCE_MM_PER_SQRT_KM = 4;
/** Section (forward − backward) tolerance 4 mm/√km: FGCC (1984) §3.5, section closure of first-order class II levelling (value from memory). */
export const DEFAULT_SECTION_TOLERANCE_MM_PER_SQRT_KM = 4;
/** σ per km of levelling, 1 mm/√km: common practice for precise levelling (from memory). */
export const DEFAULT_SIGMA_MM_PER_SQRT_KM = 1;

export const heightDatumInputSchema = z.object({
  name: nameText(1, 120),
  tideSystem: tideSystemSchema,
  realisationEpoch: nameText(0, 40).nullable().optional(),
  loopToleranceMmPerSqrtKm: z.number().positive().max(100).default(DEFAULT_LOOP_TOLERANCE_MM_PER_SQRT_KM),
  sectionToleranceMmPerSqrtKm: z.number().positive().max(100).default(DEFAULT_SECTION_TOLERANCE_MM_PER_SQRT_KM),
  notes: z.string().max(4000).nullable().optional(),
});
export type HeightDatumInput = z.infer<typeof heightDatumInputSchema>;
export const heightDatumSchema = z.object({
  id: z.string().uuid(),
  name: z.string(),
  tideSystem: tideSystemSchema,
  realisationEpoch: z.string().nullable(),
  loopToleranceMmPerSqrtKm: z.number(),
  sectionToleranceMmPerSqrtKm: z.number(),
  notes: z.string().nullable(),
  benchmarkCount: z.number().int(),
});
export type HeightDatum = z.infer<typeof heightDatumSchema>;

export const benchmarkStates = ['in-use', 'destroyed'] as const;
const finite = z.number().refine(Number.isFinite, 'must be a finite number');

export const benchmarkInputSchema = z
  .object({
    code: z.string().trim().min(1).max(40).regex(/^[A-Za-z0-9._-]+$/, 'letters, digits, dot, dash and underscore only'),
    name: nameText(1, 200),
    datumId: z.string().uuid(),
    /** EPSG code or PROJ string; coordinates in that CRS's order (lon, lat[, h] for geographic; E, N for projected). */
    crs: z.string().trim().min(1).max(300),
    coordinates: z.array(finite).min(2).max(3),
    /** Known height as a geopotential number C [m²/s²] or a normal height H [m]; the other one is derived. */
    known: z
      .object({
        kind: z.enum(['C', 'H']), value: finite, uncertainty: z.number().min(0),
        /** Tide system the value is stated in; absent = not stated, and a run refuses to use it as a fixed value. */
        tideSystem: tideSystemSchema.nullable().optional(),
      })
      .nullable()
      .optional(),
    fixed: z.boolean().default(false),
    monumentation: z.string().max(2000).nullable().optional(),
    state: z.enum(benchmarkStates).default('in-use'),
  })
  .refine((b) => !b.fixed || b.known, { message: 'a fixed benchmark needs a known height', path: ['known'] });
export type BenchmarkInput = z.infer<typeof benchmarkInputSchema>;

export const benchmarkSchema = z.object({
  id: z.string().uuid(),
  code: z.string(),
  name: z.string(),
  datumId: z.string().uuid(),
  datumName: z.string(),
  crs: z.string(),
  /** How the entered coordinates read (proj4 order: lon, lat[, h]; E, N; X, Y, Z); null if the CRS no longer resolves. */
  crsKind: z.enum(['geographic2D', 'geographic3D', 'geocentric', 'projected']).nullable(),
  crsLabel: z.string().nullable(),
  coordinates: z.array(z.number()),
  latitudeDeg: z.number(),
  longitudeDeg: z.number(),
  ellipsoidalHeightM: z.number(),
  knownEnteredAs: z.enum(['C', 'H']).nullable(),
  knownC_m2s2: z.number().nullable(),
  knownNormalHeightM: z.number().nullable(),
  /** Standard uncertainty of the known C [m²/s²]. */
  knownUncertaintyC_m2s2: z.number().nullable(),
  knownUncertaintyM: z.number().nullable(),
  /** Tide system of the known value (null: not stated). */
  knownTideSystem: tideSystemSchema.nullable(),
  fixed: z.boolean(),
  monumentation: z.string().nullable(),
  state: z.enum(benchmarkStates),
});
export type Benchmark = z.infer<typeof benchmarkSchema>;

export const benchmarkSortFields = ['code', 'name', 'datumName', 'latitudeDeg', 'longitudeDeg', 'knownNormalHeightM', 'fixed', 'state'] as const;
export const benchmarkListQuerySchema = pageQuerySchema.extend({ datumId: z.string().uuid().optional(), sort: sortableBy(benchmarkSortFields) });

export const sectionInputSchema = z.object({
  lineName: nameText(0, 120).nullable().optional(),
  fromCode: nameText(1, 40),
  toCode: nameText(1, 40),
  /** Measured height difference Δn, to minus from [m]. */
  deltaHeightM: finite.refine((v) => Math.abs(v) < 10_000, 'implausibly large'),
  lengthKm: z.number().positive().max(10_000),
  /** Mean surface gravity along the section [m/s²]; absent: normal gravity at the mid-latitude. */
  meanGravity_ms2: z.number().min(9.7).max(9.9).nullable().optional(),
  observedOn: z.string().regex(/^\d{4}-\d{2}-\d{2}$/, 'date as YYYY-MM-DD').nullable().optional(),
  forwardM: finite.nullable().optional(),
  backwardM: finite.nullable().optional(),
});
export type SectionInput = z.infer<typeof sectionInputSchema>;

export const sectionSchema = z.object({
  id: z.string().uuid(),
  lineName: z.string().nullable(),
  fromCode: z.string(),
  toCode: z.string(),
  datumName: z.string(),
  deltaHeightM: z.number(),
  lengthKm: z.number(),
  meanGravity_ms2: z.number(),
  gravityFromNormal: z.boolean(),
  /** ΔC = ḡ·Δn [m²/s²]. */
  deltaC_m2s2: z.number(),
  observedOn: z.string().nullable(),
  forwardM: z.number().nullable(),
  backwardM: z.number().nullable(),
  /** forward + backward (the return run is measured to → from) [mm]. */
  runDifferenceMm: z.number().nullable(),
  runToleranceMm: z.number().nullable(),
  runCheckPassed: z.boolean().nullable(),
});
export type Section = z.infer<typeof sectionSchema>;
export const sectionSortFields = ['lineName', 'fromCode', 'toCode', 'deltaHeightM', 'lengthKm', 'observedOn', 'meanGravity_ms2'] as const;
export const sectionListQuerySchema = pageQuerySchema.extend({ datumId: z.string().uuid().optional(), sort: sortableBy(sectionSortFields) });

export const sectionUploadQuerySchema = z.object({ preview: z.enum(['true', 'false']).default('false') });
export const sectionUploadResultSchema = z.object({
  stored: z.boolean(),
  rowCount: z.number().int(),
  sha256: z.string(),
  rows: z.array(sectionInputSchema.extend({ line: z.number().int(), gravityFromNormal: z.boolean(), runCheckPassed: z.boolean().nullable() })),
  warnings: z.array(z.object({ line: z.number().int(), message: z.string() })),
});
export type SectionUploadResult = z.infer<typeof sectionUploadResultSchema>;

export const loopsQuerySchema = z.object({ datumId: z.string().uuid().optional() });
export const loopSchema = z.object({
  misclosure_m2s2: z.number(),
  misclosureMm: z.number(),
  lengthKm: z.number(),
  toleranceMm: z.number(),
  passed: z.boolean(),
  sections: z.array(z.object({ id: z.string(), fromCode: z.string(), toCode: z.string(), lineName: z.string().nullable(), reversed: z.boolean() })),
});
export const loopReportSchema = z.object({
  toleranceMmPerSqrtKm: z.number(),
  toleranceSource: z.string(),
  meanGravity_ms2: z.number(),
  independentLoops: z.number().int(),
  failing: z.number().int(),
  loops: z.array(loopSchema),
});
export type LoopReport = z.infer<typeof loopReportSchema>;

// ---- adjustment runs ----

export const adjustmentOptionsSchema = z.object({
  sigmaMmPerSqrtKm: z.number().positive().max(100).default(DEFAULT_SIGMA_MM_PER_SQRT_KM),
  includeClocks: z.boolean().default(false),
  datumOffsets: z.boolean().default(true),
  constraint: z.enum(['fixed', 'minimum']).default('fixed'),
  alpha: z.number().gt(0).lt(1).default(0.05),
  alphaSnooping: z.number().gt(0).lt(1).default(0.001),
  note: z.string().max(500).nullable().optional(),
});
export type AdjustmentOptionsInput = z.input<typeof adjustmentOptionsSchema>;
export type AdjustmentRunOptions = z.infer<typeof adjustmentOptionsSchema>;

export const runStates = ['queued', 'running', 'done', 'failed'] as const;

export const runPointSchema = z.object({
  code: z.string(),
  kind: z.enum(['benchmark', 'site']),
  label: z.string(),
  datumName: z.string().nullable(),
  latitudeDeg: z.number(),
  c_m2s2: z.number(),
  sigmaC_m2s2: z.number(),
  normalHeightM: z.number(),
  sigmaHeightM: z.number(),
  datum: z.enum(['held', 'weighted', 'free']),
  knownC_m2s2: z.number().nullable(),
});
export const runObservationSchema = z.object({
  id: z.string(),
  kind: z.enum(['levelling', 'tie', 'clock']),
  from: z.string(),
  to: z.string(),
  label: z.string(),
  deltaC_m2s2: z.number(),
  sigma_m2s2: z.number(),
  residual_m2s2: z.number(),
  redundancy: z.number(),
  standardizedResidual: z.number().nullable(),
  /** True only for observations that the data-snooping iteration removed (Baarda 1968). */
  suspected: z.boolean(),
  /** Step of the iteration at which it was removed (1 = first); null when it stayed in. */
  removedAtStep: z.number().int().nullable().optional(),
  /** Σ coefficient × estimate of the shared parameters in this observation [m²/s²]. */
  sharedEffect_m2s2: z.number().optional(),
});
const sharedParameterResultSchema = z.object({
  name: z.string(),
  label: z.string(),
  /** Estimate of the shared systematic effect [m²/s²] (prior 0). */
  value_m2s2: z.number(),
  sigma_m2s2: z.number(),
  priorSigma_m2s2: z.number(),
  observations: z.number().int(),
});
const runDifferenceSchema = z.object({
  from: z.string(),
  to: z.string(),
  deltaC_m2s2: z.number(),
  /** √(q_ff + q_tt − 2q_ft), a-priori scale (σ0 = 1). */
  sigma_m2s2: z.number(),
  /** √(σ_f² + σ_t²): what neglecting the covariance would give (shown for comparison only). */
  sigmaIgnoringCovariance_m2s2: z.number(),
});
export const runResultSchema = z.object({
  points: z.array(runPointSchema),
  observations: z.array(runObservationSchema),
  datumOffsets: z.array(z.object({ name: z.string(), value_m2s2: z.number(), sigma_m2s2: z.number(), valueMm: z.number(), sigmaMm: z.number() })),
  unknowns: z.number().int(),
  degreesOfFreedom: z.number().int(),
  vtpv: z.number(),
  sigma0: z.number().nullable(),
  globalTest: z.object({ statistic: z.number(), lower: z.number(), critical: z.number(), alpha: z.number(), passed: z.boolean() }).nullable(),
  snooping: z.object({
    alpha0: z.number(), criticalValue: z.number(),
    /** Observations removed by the iteration, in order of removal, each with w at removal. */
    suspects: z.array(z.object({ id: z.string(), label: z.string(), standardizedResidual: z.number(), step: z.number().int().optional() })),
    stoppedEarly: z.boolean().optional(),
    /** The first adjustment, before any removal. */
    initial: z.object({ sigma0: z.number().nullable(), degreesOfFreedom: z.number().int(), globalTestPassed: z.boolean().nullable() }).optional(),
  }),
  redundancySum: z.number(),
  elapsedMs: z.number(),
  sharedParameters: z.array(sharedParameterResultSchema).optional(),
  differences: z.array(runDifferenceSchema).optional(),
  /**
   * Whether σ of adjusted values and differences is used scaled by σ̂0: only when the global test rejects a too-large
   * vᵀPv (σ̂0 > 1 significantly); otherwise the a-priori σ (σ0 = 1) is used.
   */
  sigmaScale: z.object({ applied: z.boolean(), factor: z.number(), rule: z.string() }).optional(),
  referenceDatum: z.string().nullable().optional(),
  /** Conversions between tide systems applied to the inputs before the adjustment. */
  tideConversions: z.array(z.object({ label: z.string(), from: tideSystemSchema, to: tideSystemSchema, shift_m2s2: z.number() })).optional(),
  /** Inputs left out, with the reason (e.g. a clock result whose tide system is not stated). */
  excluded: z.array(z.object({ label: z.string(), reason: z.string() })).optional(),
  /** What entered the run (runs stored before this was kept have none). */
  entered: z.object({
    clocks: z.array(z.object({ id: z.string(), name: z.string(), campaigns: z.number().int() })),
    /** via 'chain': the campaign entered through the calibration chain chainId, not as an observation of its own. */
    campaigns: z.array(z.object({ id: z.string(), name: z.string(), via: z.enum(['direct', 'chain']), chainId: z.string().nullable() })),
    chains: z.array(z.object({ id: z.string(), name: z.string(), observationId: z.string(), campaignIds: z.array(z.string()) })),
    /** Ratio closures of the campaigns that entered (every campaign of the loop entered): checks, not observations. */
    closures: z.array(z.object({ id: z.string(), name: z.string(), en: z.number().optional(), agreed: z.boolean().optional() }).passthrough()),
  }).optional(),
});
export type RunResult = z.infer<typeof runResultSchema>;

export const adjustmentRunSchema = z.object({
  id: z.string().uuid(),
  state: z.enum(runStates),
  progress: z.number(),
  stage: z.string().nullable(),
  options: adjustmentOptionsSchema,
  inputSummary: z.object({ benchmarks: z.number().int(), sections: z.number().int(), ties: z.number().int(), clocks: z.number().int(), inputSha256: z.string() }),
  error: z.object({ message: z.string(), reason: z.string().optional(), parts: z.array(z.object({ codes: z.array(z.string()), count: z.number() })).optional() }).nullable(),
  createdBy: z.string().nullable(),
  createdAt: z.string(),
  startedAt: z.string().nullable(),
  finishedAt: z.string().nullable(),
  sigma0: z.number().nullable(),
  degreesOfFreedom: z.number().int().nullable(),
  globalTestPassed: z.boolean().nullable(),
  suspects: z.number().int().nullable(),
});
export type AdjustmentRun = z.infer<typeof adjustmentRunSchema>;
export const adjustmentRunDetailSchema = adjustmentRunSchema.extend({ result: runResultSchema.nullable() });
export type AdjustmentRunDetail = z.infer<typeof adjustmentRunDetailSchema>;

// ---- reconciliation and map ----

export const reconciliationVerdicts = ['agreed', 'not-agreed', 'not-comparable', 'no-levelling'] as const;
export const reconciliationVerdictSchema = z.enum(reconciliationVerdicts);
export type ReconciliationVerdict = z.infer<typeof reconciliationVerdictSchema>;
export const reconciliationRowSchema = z.object({
  /** A campaign's own clock ΔC, or a calibration chain's (then campaignId is the chain's id and chainId says so). */
  source: z.enum(['campaign', 'chain']).optional(),
  chainId: z.string().nullable().optional(),
  linkId: z.string(),
  linkLabel: z.string(),
  campaignId: z.string(),
  campaignLabel: z.string(),
  fromSite: z.string(),
  toSite: z.string(),
  /** Datums of the two sites' tie benchmarks in the levelling-only run (null: the site has no tie in it). */
  fromDatum: z.string().nullable(),
  toDatum: z.string().nullable(),
  crossesDatums: z.boolean(),
  /** False when there is no levelled ΔC, or the sites sit in two datums that no levelling connects (unknown datum offset). */
  comparable: z.boolean(),
  verdict: reconciliationVerdictSchema,
  clockDeltaC_m2s2: z.number(),
  clockExpandedU_m2s2: z.number(),
  levellingDeltaC_m2s2: z.number().nullable(),
  levellingExpandedU_m2s2: z.number().nullable(),
  /** σ of the levelled ΔC as used (k = 1): √(q_AA + q_BB − 2q_AB), scaled by σ̂0 only when the run's global test failed. */
  levellingSigma_m2s2: z.number().nullable().optional(),
  /** √(σ_A² + σ_B²), what neglecting the covariance would give (shown for comparison). */
  levellingSigmaIgnoringCovariance_m2s2: z.number().nullable().optional(),
  levellingSigmaMethod: z.enum(['covariance', 'root-sum-square']).nullable().optional(),
  levellingSigmaScaled: z.boolean().optional(),
  /** Tide systems of the two sides and the conversion applied before comparing; null when a system is not stated. */
  tide: z.object({
    clockSystem: tideSystemSchema, fromDatumSystem: tideSystemSchema, toDatumSystem: tideSystemSchema, comparedIn: tideSystemSchema,
    clockShift_m2s2: z.number(), levellingShift_m2s2: z.number(), statement: z.string(),
  }).nullable().optional(),
  /** Clock minus levelled ΔC, both in the comparison's tide system. */
  difference_m2s2: z.number().nullable(),
  en: z.number().nullable(),
  agreed: z.boolean().nullable(),
  note: z.string().nullable(),
});
export const reconciliationSchema = z.object({
  levellingRunId: z.string().nullable(),
  levellingRunAt: z.string().nullable(),
  clockRunId: z.string().nullable(),
  rows: z.array(reconciliationRowSchema),
  datumOffsets: z.array(z.object({ name: z.string(), value_m2s2: z.number(), sigma_m2s2: z.number(), valueMm: z.number(), sigmaMm: z.number() })),
  message: z.string().nullable(),
  sigmaPolicy: z.object({ scaled: z.boolean(), factor: z.number(), statement: z.string(), covariance: z.string() }).optional(),
});
export type Reconciliation = z.infer<typeof reconciliationSchema>;

export const networkMapSchema = z.object({
  benchmarks: z.array(z.object({ id: z.string(), code: z.string(), name: z.string(), latitudeDeg: z.number(), longitudeDeg: z.number(), fixed: z.boolean(), destroyed: z.boolean(), datumName: z.string() })),
  sections: z.array(z.object({ id: z.string(), fromCode: z.string(), toCode: z.string(), lineName: z.string().nullable(), adjusted: z.boolean(), standardizedResidual: z.number().nullable(), suspected: z.boolean() })),
  sites: z.array(z.object({ id: z.string(), code: z.string(), name: z.string(), latitudeDeg: z.number(), longitudeDeg: z.number(), benchmarkCode: z.string().nullable() })),
  links: z.array(z.object({
    id: z.string(), label: z.string(), fromSiteId: z.string(), toSiteId: z.string(),
    /** The largest |E_n| among the link's comparable campaigns. */
    en: z.number().nullable(),
    comparisons: z.array(z.object({ campaignLabel: z.string(), en: z.number().nullable(), verdict: reconciliationVerdictSchema })),
  })),
  runId: z.string().nullable(),
});
export type NetworkMap = z.infer<typeof networkMapSchema>;

// ---- stateless calculator ----

const pointCode = z.string().min(1).max(80);
export const calcAdjustBodySchema = z.object({
  points: z.array(z.object({ code: pointCode, fixedC: finite.optional(), sigmaFixed: z.number().min(0).optional() })).min(1).max(50_000),
  observations: z
    .array(z.object({
      from: pointCode, to: pointCode, deltaC: finite,
      /** Own (non-shared) standard deviation of this observation [m²/s²]. */
      sigma: z.number().positive(),
      /** Names of the clocks at the from and to ends; their systematic effects (clockSystematics) enter with −1 and +1. */
      clocks: z.object({ from: z.string().min(1).max(120), to: z.string().min(1).max(120) }).optional(),
    }))
    .min(1)
    .max(200_000),
  /** Standard uncertainty of each clock's systematic effect [m²/s²], shared by every observation naming the clock. */
  clockSystematics: z.array(z.object({ clock: z.string().min(1).max(120), sigma: z.number().positive() })).max(10_000).default([]),
  /** Adjusted differences C_to − C_from wanted with their covariance-based σ. */
  differences: z.array(z.object({ from: pointCode, to: pointCode })).max(10_000).default([]),
});
export type CalcAdjustBody = z.infer<typeof calcAdjustBodySchema>;
export const calcAdjustResultSchema = z.object({
  points: z.array(z.object({ code: z.string(), c: z.number(), sigma: z.number() })),
  observations: z.array(z.object({
    from: z.string(), to: z.string(),
    /** Adjusted minus observed, with the clocks' estimated systematic effects part of the adjusted value [m²/s²]. */
    residual: z.number(), redundancy: z.number(), standardizedResidual: z.number().nullable(),
    /** True only for observations removed by the data-snooping iteration (Baarda 1968). */
    suspected: z.boolean(),
    removedAtStep: z.number().int().nullable(),
  })),
  /** σ = √(q_ff + q_tt − 2q_ft), a-priori scale like the points' sigma [m²/s²]. */
  differences: z.array(z.object({ from: z.string(), to: z.string(), deltaC: z.number(), sigma: z.number() })),
  clockSystematics: z.array(z.object({ clock: z.string(), estimate: z.number(), sigma: z.number(), priorSigma: z.number(), observations: z.number().int() })),
  snooping: z.object({
    criticalValue: z.number(),
    /** In order of removal; `index` counts in observations (source observation) or points (a weighted fixed point). */
    removals: z.array(z.object({ step: z.number().int(), source: z.enum(['observation', 'fixedPoint']), index: z.number().int(), from: z.string().optional(), to: z.string().optional(), code: z.string().optional(), standardizedResidual: z.number() })),
    stoppedEarly: z.boolean(),
  }),
  sigma0: z.number().nullable(),
  degreesOfFreedom: z.number().int(),
  globalTest: z.object({ statistic: z.number(), critical: z.number(), passed: z.boolean() }).nullable(),
});
export type CalcAdjustResult = z.infer<typeof calcAdjustResultSchema>;
