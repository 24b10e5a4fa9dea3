import { z } from 'zod';

// What a certificate shows, frozen at issue time. The PDF is rendered from this snapshot alone,
// so a certificate can be re-rendered years later from the stored JSON.

/** Our own numbering: CL-<year>-<serial, 5 digits>-r<revision>. */
export const CERTIFICATE_NUMBER_PATTERN = /^CL-(\d{4})-(\d{5})-r(\d+)$/;

export const certificateNumberSchema = z.string().regex(CERTIFICATE_NUMBER_PATTERN, 'expected CL-<year>-<5-digit serial>-r<revision>');

/** Frequency ratios and nominal frequencies travel as decimal strings: float64 cannot hold 18+ digits. */
const decimalString = z.string().regex(/^[+-]?\d+(\.\d+)?([eE][+-]?\d+)?$/, 'expected a decimal number as a string');

const sha256Hex = z.string().regex(/^[0-9a-f]{64}$/, 'expected a lower-case hex SHA-256');

/**
 * A value with its expanded uncertainty U = k·u, k = t_p(ν_eff) (JCGM 100:2008 G.6.4). p and ν_eff are absent only in
 * snapshots issued before they were recorded (those state k = 2).
 */
const expandedQuantity = z.object({
  value: z.number(),
  expandedUncertainty: z.number().nonnegative(),
  coverageFactor: z.number().positive(),
  coverageProbability: z.number().gt(0).lt(1).optional(),
  /** Welch–Satterthwaite ν_eff; null when infinite. */
  effectiveDegreesOfFreedom: z.number().positive().nullable().optional(),
});

const clockSchema = z.object({
  name: z.string().min(1),
  institute: z.string().min(1),
  species: z.string().min(1),
  transition: z.string().min(1),
  nominalFrequencyHz: decimalString,
});

export const budgetRowSchema = z.object({
  component: z.string().min(1),
  type: z.enum(['A', 'B']),
  standardUncertainty: z.number().nonnegative(),
  /** Sensitivity coefficient c_i of GUM (JCGM 100:2008) 5.1.3. */
  sensitivity: z.number(),
  /** |c_i|·u(x_i), in the unit of the output quantity. */
  contribution: z.number().nonnegative(),
  unit: z.string().min(1),
});

export const allanPointSchema = z.object({
  tauSeconds: z.number().positive(),
  adev: z.number().positive(),
  low: z.number().positive(),
  high: z.number().positive(),
});

export const reviewDecisionSchema = z.object({
  acceptedBy: z.string().nullable(),
  acceptanceComment: z.string().nullable(),
  certifiedBy: z.string().min(1),
  certificationComment: z.string().min(1),
  /** Review exceptions (Eₙ not agreed, low uptime, …) stated in words; empty when there were none. */
  exceptions: z.array(z.string().min(1)),
  justifications: z.array(z.object({ stage: z.enum(['acceptance', 'certification']), by: z.string().min(1), text: z.string().min(1) })),
});
export type ReviewDecision = z.infer<typeof reviewDecisionSchema>;

export const certificateSnapshotSchema = z
  .object({
    certificateNumber: certificateNumberSchema,
    revision: z.number().int().nonnegative(),
    issueDate: z.iso.datetime(),
    issuingInstitute: z.string().min(1),
    participants: z.array(z.string().min(1)).min(1),
    clockA: clockSchema,
    clockB: clockSchema,
    fibreLink: z.object({
      name: z.string().min(1),
      fibreLengthKm: z.number().nonnegative(),
      geodesicDistanceKm: z.number().nonnegative(),
    }),
    measurementPeriod: z.object({ start: z.iso.datetime(), end: z.iso.datetime() }),
    uptimeFraction: z.number().min(0).max(1),
    measuredRatio: decimalString,
    referenceRatio: z.object({ value: decimalString, source: z.string().min(1) }),
    fractionalOffset: z.object({
      y: z.number(),
      standardUncertainty: z.number().nonnegative(),
      /** y written with enough digits that rounding stays below u/10. */
      yText: z.string().optional(),
    }),
    deltaC_m2s2: expandedQuantity,
    deltaH_m: expandedQuantity,
    geodeticComparison: z.object({
      deltaHGeodesy_m: expandedQuantity,
      source: z.string().min(1),
      En: z.number(),
      agreed: z.boolean(),
    }),
    budget: z.object({
      /** Unit of the output quantity the contributions are expressed in (e.g. m²/s²). */
      outputUnit: z.string().min(1),
      rows: z.array(budgetRowSchema).min(1),
      combinedStandardUncertainty: z.number().nonnegative(),
      coverageFactor: z.number().positive().optional(),
      coverageProbability: z.number().gt(0).lt(1).optional(),
      effectiveDegreesOfFreedom: z.number().positive().nullable().optional(),
    }),
    allanDeviation: z.array(allanPointSchema).min(2),
    /** Decimated series for the thumbnail: seconds since measurement start, fractional offset y. */
    timeSeries: z.array(z.object({ tSeconds: z.number().nonnegative(), y: z.number() })).min(2),
    tideSystem: z.enum(['mean-tide', 'zero-tide', 'tide-free']),
    w0Convention: z.object({ name: z.string().min(1), value_m2s2: z.number(), source: z.string().min(1) }),
    constants: z.array(z.object({ name: z.string().min(1), value: z.string().min(1), unit: z.string(), source: z.string().min(1) })),
    softwareVersion: z.string().min(1),
    inputFiles: z.array(z.object({ name: z.string().min(1), sha256: sha256Hex })).min(1),
    auditChainHead: sha256Hex,
    method: z.object({ statement: z.string().min(1), sources: z.array(z.string().min(1)).min(1) }),
    /** Campaign-specific cautions; the standing cautions are printed on every certificate anyway. */
    cautions: z.array(z.string().min(1)),
    /** What the result takes for granted (correlations, lab corrections, tide model, frames); absent in older snapshots. */
    assumptions: z.array(z.string().min(1)).optional(),
    signer: z.object({ name: z.string().min(1), role: z.string().min(1) }),
    verificationUrl: z.url(),
    /** The review decision behind the certificate: who accepted and certified, their comments, and why exceptions were accepted. */
    review: reviewDecisionSchema.optional(),
  })
  .superRefine((s, ctx) => {
    const m = CERTIFICATE_NUMBER_PATTERN.exec(s.certificateNumber);
    if (m && Number(m[3]) !== s.revision) {
      ctx.addIssue({ code: 'custom', path: ['revision'], message: `revision ${s.revision} does not match certificate number ${s.certificateNumber}` });
    }
    if (Date.parse(s.measurementPeriod.end) <= Date.parse(s.measurementPeriod.start)) {
      ctx.addIssue({ code: 'custom', path: ['measurementPeriod', 'end'], message: 'end must be after start' });
    }
    s.allanDeviation.forEach((p, i) => {
      if (!(p.low <= p.adev && p.adev <= p.high)) {
        ctx.addIssue({ code: 'custom', path: ['allanDeviation', i], message: 'expected low ≤ adev ≤ high' });
      }
    });
  });

export type CertificateSnapshot = z.infer<typeof certificateSnapshotSchema>;
export type CertificateBudgetRow = z.infer<typeof budgetRowSchema>;
export type CertificateAllanPoint = z.infer<typeof allanPointSchema>;

export function formatCertificateNumber(year: number, serial: number, revision: number): string {
  if (!Number.isInteger(year) || year < 1000 || year > 9999) throw new RangeError(`year ${year} is not a 4-digit year`);
  if (!Number.isInteger(serial) || serial < 0 || serial > 99_999) throw new RangeError(`serial ${serial} does not fit 5 digits`);
  if (!Number.isInteger(revision) || revision < 0) throw new RangeError(`revision ${revision} must be a non-negative integer`);
  return `CL-${year}-${String(serial).padStart(5, '0')}-r${revision}`;
}

// ---------------------------------------------------------------------------------------------------------------
// Chain certificates: the certificate of a calibration chain (a remote comparison of a transportable clock T with one
// or two side-by-side calibrations of T against the same reference clock). Its own snapshot kind, versioned; the
// numbers are those of the chain computation (server/chains/chain-compute.ts), frozen at issue time.

export const CHAIN_SNAPSHOT_VERSION = 1;

/** Value with u_c, U = k·u_c, k, p and ν_eff (JCGM 100:2008 G.6.4, G.4.1); ν_eff null when infinite. */
const chainQuantity = z.object({
  value: z.number(),
  standardUncertainty: z.number().nonnegative(),
  expandedUncertainty: z.number().nonnegative(),
  coverageFactor: z.number().positive(),
  coverageProbability: z.number().gt(0).lt(1),
  effectiveDegreesOfFreedom: z.number().positive().nullable(),
});

const chainClockSchema = z.object({ name: z.string().min(1), institute: z.string().min(1), species: z.string().min(1) });

export const chainCampaignPartSchema = z.object({
  campaignId: z.string().uuid(),
  label: z.string().min(1),
  role: z.enum(['remote', 'side-by-side-before', 'side-by-side-after']),
  state: z.string().min(1),
  clockA: z.string().min(1),
  clockB: z.string().min(1),
  siteA: z.string().min(1),
  siteB: z.string().min(1),
  period: z.object({ start: z.iso.datetime(), end: z.iso.datetime() }),
  /** Which clock of the comparison is the transportable clock T. */
  transportableIs: z.enum(['A', 'B']),
  /** The comparison's tide-corrected fractional offset y and its standard uncertainty. */
  y: z.number(),
  standardUncertaintyY: z.number().nonnegative(),
  /** The budget version of T pinned by the campaign (the one its result was computed with). */
  transportableBudgetVersion: z.number().int().positive(),
  /** The partner's (reference clock's) pinned budget version. */
  partnerBudgetVersion: z.number().int().positive(),
  resultId: z.string().uuid(),
  /** Side by side only: the local potential difference between the two clocks' reference points. */
  localTie: z.object({ deltaC_m2s2: z.number(), standardUncertainty_m2s2: z.number().nonnegative(), source: z.string().min(1) }).nullable(),
});

export const chainBudgetRowSchema = z.object({
  label: z.string().min(1),
  type: z.enum(['A', 'B']),
  /** Unit of xᵢ ("1" for a fractional quantity). */
  unit: z.string().min(1),
  standardUncertainty: z.number().nonnegative(),
  /** ∂ΔC/∂xᵢ in m²/s² per unit of xᵢ, summed over every comparison the input enters (0: cancels). */
  sensitivity_m2s2: z.number(),
  /** |cᵢ|·u(xᵢ), m²/s². */
  contribution_m2s2: z.number().nonnegative(),
  varianceShare: z.number().min(0).max(1),
  /** ν of the input; null when infinite (type B taken as exactly known). */
  degreesOfFreedom: z.number().positive().nullable(),
  cancels: z.boolean(),
  /** The campaigns the input enters. */
  enters: z.array(z.string()),
});

export const chainCertificateSnapshotSchema = z
  .object({
    kind: z.literal('chain'),
    schemaVersion: z.literal(CHAIN_SNAPSHOT_VERSION),
    certificateNumber: certificateNumberSchema,
    revision: z.number().int().nonnegative(),
    issueDate: z.iso.datetime(),
    issuingInstitute: z.string().min(1),
    participants: z.array(z.string().min(1)).min(1),
    chain: z.object({
      id: z.string().uuid(),
      name: z.string().min(1),
      transportableClock: chainClockSchema,
      referenceClock: chainClockSchema,
      notes: z.string(),
    }),
    /** ΔC = C(to) − C(from): from the partner's site to the site where T stood in the remote comparison. */
    fromSite: z.string().min(1),
    toSite: z.string().min(1),
    deltaC_m2s2: chainQuantity,
    deltaH_m: chainQuantity.extend({ method: z.string().min(1) }),
    yRemote: z.number(),
    ySideBySide: z.number(),
    yChain: z.number(),
    campaigns: z.array(chainCampaignPartSchema).min(2),
    deployments: z.array(z.object({ site: z.string().min(1), arrivedAt: z.iso.datetime(), departedAt: z.iso.datetime().nullable(), note: z.string() })),
    cancellation: z.object({
      /** T's systematic offset is one quantity in every comparison (one budget version pinned): sensitivity exactly 0. */
      transportableCancels: z.boolean(),
      transportableBudgetVersions: z.array(z.number().int().positive()).min(1),
      statement: z.string().min(1),
    }),
    calibrations: z.array(z.object({
      which: z.enum(['before', 'after']),
      offset: z.number(),
      unsharedUncertainty: z.number().nonnegative(),
      weight: z.number().min(0).max(1),
    })).min(1),
    transport: z.object({
      /** Fractional standard uncertainty of T's transport reproducibility, and the same × c² in m²/s². */
      standardUncertainty: z.number().nonnegative(),
      standardUncertainty_m2s2: z.number().nonnegative(),
      origin: z.enum(['entered', 'before-after']),
      source: z.string().min(1),
      degreesOfFreedom: z.number().positive().nullable(),
    }),
    beforeAfter: z.object({
      difference: z.number(),
      standardUncertainty: z.number().nonnegative(),
      expandedUncertainty: z.number().nonnegative(),
      coverageFactor: z.literal(2),
      En: z.number(),
      agreed: z.boolean(),
      statement: z.string().min(1),
    }).nullable(),
    budget: z.object({
      outputUnit: z.literal('m²/s²'),
      rows: z.array(chainBudgetRowSchema).min(1),
      combinedStandardUncertainty: z.number().nonnegative(),
      coverageFactor: z.number().positive(),
      coverageProbability: z.number().gt(0).lt(1),
      effectiveDegreesOfFreedom: z.number().positive().nullable(),
    }),
    tideSystem: z.enum(['mean-tide', 'zero-tide', 'tide-free']),
    /** How tides were treated in the comparisons the chain is built from. */
    tides: z.string().min(1),
    softwareVersion: z.string().min(1),
    auditChainHead: sha256Hex,
    method: z.object({ statement: z.string().min(1), sources: z.array(z.string().min(1)).min(1) }),
    assumptions: z.array(z.string().min(1)),
    cautions: z.array(z.string().min(1)),
    signer: z.object({ name: z.string().min(1), role: z.string().min(1) }),
    verificationUrl: z.url(),
    review: reviewDecisionSchema.optional(),
  })
  .superRefine((s, ctx) => {
    const m = CERTIFICATE_NUMBER_PATTERN.exec(s.certificateNumber);
    if (m && Number(m[3]) !== s.revision) {
      ctx.addIssue({ code: 'custom', path: ['revision'], message: `revision ${s.revision} does not match certificate number ${s.certificateNumber}` });
    }
    if (s.campaigns.filter((c) => c.role === 'remote').length !== 1) ctx.addIssue({ code: 'custom', path: ['campaigns'], message: 'exactly one remote campaign' });
  });

export type ChainCertificateSnapshot = z.infer<typeof chainCertificateSnapshotSchema>;

/** Either kind of snapshot, as GET …/certificates/:number/snapshot answers it (a chain's carries kind: 'chain'). */
export const anyCertificateSnapshotSchema = z.union([chainCertificateSnapshotSchema, certificateSnapshotSchema]);
export type AnyCertificateSnapshot = z.infer<typeof anyCertificateSnapshotSchema>;
export const isChainSnapshot = (s: AnyCertificateSnapshot): s is ChainCertificateSnapshot => 'kind' in s && s.kind === 'chain';
