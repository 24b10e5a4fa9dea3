import { z } from 'zod';
import { nameText } from './http';

// Calculator contract: stateless conversions on top of the science core. Ratios are decimal strings (never JSON numbers,
// which would drop digits beyond the 17th); everything else is a plain number with its unit in the field name.

const decimalString = z.string().trim().regex(/^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d{1,4})?$/, 'a decimal number written as a string, e.g. "1.000000000000000012"');
const latitude = z.number().min(-90).max(90);
const longitude = z.number().min(-540).max(540);
const finite = z.number().refine(Number.isFinite, 'must be a finite number');

export const redshiftRequestSchema = z.object({
  ratio: decimalString,
  referenceRatio: decimalString.default('1'),
  /** Standard uncertainty of y (k = 1). */
  fractionalUncertainty: z.number().min(0).max(1).optional(),
  latitudeDeg: latitude,
  /** Normal height of clock A (m); ΔH is computed at A's height. */
  normalHeightM: z.number().min(-1000).max(10_000).default(0),
});
export type RedshiftRequest = z.input<typeof redshiftRequestSchema>;

const quantity = <U extends string>(unit: U) => z.object({ value: z.number(), uncertainty: z.number().nullable(), unit: z.literal(unit) });
export const redshiftResponseSchema = z.object({
  fractionalOffset: z.number(),
  /** y to 50 significant digits from the decimal computation. */
  fractionalOffsetDecimal: z.string(),
  potentialDifference: quantity('m2/s2'),
  heightDifference: quantity('m'),
  coverageFactor: z.literal(1),
  method: z.string(),
});
export type RedshiftResponse = z.infer<typeof redshiftResponseSchema>;

/**
 * Longest series the stability calculator takes in one request (≈ 2.3 days at 1 s; ≈ 4 MB of JSON). Longer series
 * belong in an upload, whose stability is computed from the stored samples.
 */
export const MAX_STABILITY_SAMPLES = 200_000;
export const stabilityRequestSchema = z
  .object({
    tau0Seconds: z.number().positive().refine(Number.isFinite, 'must be finite'),
    fractionalFrequency: z.array(z.number()).min(3).max(MAX_STABILITY_SAMPLES, `at most ${MAX_STABILITY_SAMPLES} samples per request`).optional(),
    phaseSeconds: z.array(z.number()).min(4).max(MAX_STABILITY_SAMPLES, `at most ${MAX_STABILITY_SAMPLES} samples per request`).optional(),
    /** Averaging times, each a whole multiple of τ0; octaves 1, 2, 4 … × τ0 when omitted. */
    tauSeconds: z.array(z.number().positive()).min(1).max(200).optional(),
  })
  .superRefine((v, ctx) => {
    if (!v.fractionalFrequency === !v.phaseSeconds) {
      ctx.addIssue({ code: 'custom', path: ['fractionalFrequency'], message: 'give either fractionalFrequency or phaseSeconds, not both and not neither' });
    }
  });
export type StabilityRequest = z.input<typeof stabilityRequestSchema>;

export const noiseTypeSchema = z.enum(['WPM', 'FPM', 'WFM', 'FFM', 'RWFM']);
export const stabilityPointSchema = z.object({
  tauSeconds: z.number(),
  n: z.number().int(),
  adev: z.number().nullable(),
  adevLow: z.number().nullable(),
  adevHigh: z.number().nullable(),
  mdev: z.number().nullable(),
  tdev: z.number().nullable(),
  edf: z.number().nullable(),
  noiseType: noiseTypeSchema,
  noiseIdentified: z.boolean(),
  /** acf: lag-1 autocorrelation; b1: B1 ratio (R(n) for phase noise) where the ACF is inconclusive; carried from a shorter τ. */
  noiseMethod: z.enum(['acf', 'b1', 'carried']),
  mdevLow: z.number().nullable(),
  mdevHigh: z.number().nullable(),
  tdevLow: z.number().nullable(),
  tdevHigh: z.number().nullable(),
  /** Overlapping Hadamard deviation with its interval (SP 1065 §5.2.8). */
  hdev: z.number().nullable(),
  hdevLow: z.number().nullable(),
  hdevHigh: z.number().nullable(),
  /** Total deviation (SP 1065 §5.2.11); null for records with gaps. */
  totdev: z.number().nullable(),
});
export type StabilityPointDto = z.infer<typeof stabilityPointSchema>;
export const stabilityResponseSchema = z.object({
  points: z.array(stabilityPointSchema),
  method: z.string(),
});
export type StabilityResponse = z.infer<typeof stabilityResponseSchema>;

export const normalGravityRequestSchema = z.object({ latitudeDeg: latitude, heightM: z.number().min(-1000).max(20_000).default(0) });
export type NormalGravityRequest = z.input<typeof normalGravityRequestSchema>;
export const normalGravityResponseSchema = z.object({
  /** Normal gravity at the height, m/s². */
  gravity: z.number(),
  /** Mean normal gravity between the ellipsoid and the height (for normal heights), m/s². */
  meanGravityToHeight: z.number(),
  unit: z.literal('m/s2'),
  ellipsoid: z.literal('GRS80'),
});
export type NormalGravityResponse = z.infer<typeof normalGravityResponseSchema>;

const point = z.object({ latitudeDeg: latitude, longitudeDeg: longitude });
export const geodesicRequestSchema = z.object({ from: point, to: point });
export type GeodesicRequest = z.input<typeof geodesicRequestSchema>;
export const geodesicResponseSchema = z.object({
  distanceM: z.number(),
  azimuthFromDeg: z.number(),
  azimuthToDeg: z.number(),
  ellipsoid: z.literal('GRS80'),
});
export type GeodesicResponse = z.infer<typeof geodesicResponseSchema>;

export const transformRequestSchema = z.object({
  from: nameText(1, 500),
  to: nameText(1, 500),
  /** Longitude first for geographic CRSs (as proj4): [lon, lat, h?]; [E, N] projected; [X, Y, Z] geocentric. */
  coordinates: z.array(finite).min(2).max(3),
});
export type TransformRequest = z.input<typeof transformRequestSchema>;
export const transformResponseSchema = z.object({
  coordinates: z.array(z.number()),
  /** Name and unit of each output value, by the target CRS's kind: lon/lat (deg) and h (m), E/N (m) or X/Y/Z (m). */
  axes: z.array(z.object({ name: z.string(), unit: z.string() })),
  targetCrs: z.string(),
  assumptions: z.array(z.string()),
});
export type TransformResponse = z.infer<typeof transformResponseSchema>;

export const tideRequestSchema = z.object({
  site: z.object({ latitudeDeg: latitude, longitudeDeg: longitude, heightM: z.number().min(-1000).max(20_000).default(0) }),
  epochs: z.array(z.iso.datetime({ offset: true })).min(1).max(100_000),
  /** mean-tide: periodic part only (the permanent tide stays in the result, as in the IHRS); tide-free: the full tide. */
  tideSystem: z.enum(['mean-tide', 'tide-free']).default('mean-tide'),
});
export type TideRequest = z.input<typeof tideRequestSchema>;
export const tideResponseSchema = z.object({
  /** Tidal potential seen by a clock on the deforming Earth, (1 + k2 − h2)·W2, m²/s², one per epoch. */
  potential: z.array(z.number()),
  /** Fractional frequency change of the clock, −potential/c². */
  fractionalFrequency: z.array(z.number()),
  tideSystem: z.enum(['mean-tide', 'tide-free']),
  unit: z.literal('m2/s2'),
  method: z.string(),
});
export type TideResponse = z.infer<typeof tideResponseSchema>;

/** Planning view (computed in the browser): two sites and the clock and link uncertainties, all k = 1. */
export const planningInputSchema = z.object({
  latitudeADeg: latitude,
  normalHeightAM: z.number().min(-1000).max(10_000),
  latitudeBDeg: latitude,
  normalHeightBM: z.number().min(-1000).max(10_000),
  systematicA: z.number().min(0).max(1e-12),
  systematicB: z.number().min(0).max(1e-12),
  /** Combined instability σ_y(1 s) of the comparison, white frequency noise assumed. */
  sigmaYAt1s: z.number().positive().max(1e-10),
  link: z.number().min(0).max(1e-12),
  referenceRatio: z.number().min(0).max(1e-12),
});
export type PlanningInput = z.infer<typeof planningInputSchema>;

/** GUM budget: contributions |c_i|·u(x_i), u_c for uncorrelated inputs, ν_eff (Welch–Satterthwaite) and k = t_p(ν_eff). */
export const budgetRequestSchema = z.object({
  components: z
    .array(
      z.object({
        name: z.string().trim().min(1).max(200),
        standardUncertainty: z.number().nonnegative().refine(Number.isFinite, 'must be finite'),
        /** c_i = ∂y/∂x_i; 1 when omitted. */
        sensitivity: finite.default(1),
        /** Degrees of freedom of u(x_i); omitted or null for infinite (a well-known Type B). */
        degreesOfFreedom: z.number().positive().nullable().optional(),
      }),
    )
    .min(1)
    .max(500),
  /** Coverage probability p; 95.45 % (the normal k = 2 interval) when omitted. */
  coverageProbability: z.number().gt(0.5).lt(1).optional(),
});
export type BudgetRequest = z.input<typeof budgetRequestSchema>;
export const budgetResponseSchema = z.object({
  combinedStandardUncertainty: z.number(),
  /** Welch–Satterthwaite ν_eff; null when infinite (no component with finite degrees of freedom). */
  effectiveDegreesOfFreedom: z.number().nullable(),
  coverageFactor: z.number(),
  expandedUncertainty: z.number(),
  coverageProbability: z.number(),
  contributions: z.array(z.object({ name: z.string(), contribution: z.number(), varianceShare: z.number() })),
  method: z.string(),
});
export type BudgetResponse = z.infer<typeof budgetResponseSchema>;
