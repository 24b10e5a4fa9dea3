import { z } from 'zod';
import { pageQuerySchema, sortableBy } from './http';

// Clock-ratio closures: the sum of the fractional offsets y around a loop of campaigns that ran at the same time
// (equivalently the product of the frequency ratios), dimensionless, with its GUM uncertainty and E_n against 0.

export const closureLegSchema = z.object({
  position: z.number().int(),
  campaignId: z.string().uuid(),
  campaignName: z.string(),
  /** +1: the loop runs from the campaign's clock A to its clock B; −1: the other way. */
  sign: z.union([z.literal(1), z.literal(-1)]),
  fromClock: z.string(),
  toClock: z.string(),
  /** Mean tide-corrected y of the campaign over the common samples (dimensionless). */
  meanY: z.number(),
  referenceRatio: z.string(),
});

export const closureBudgetLineSchema = z.object({
  component: z.string(),
  type: z.enum(['A', 'B']),
  standardUncertainty: z.number(),
  sensitivity: z.number(),
  contribution: z.number(),
  varianceShare: z.number(),
  note: z.string(),
});

export const closureSummarySchema = z.object({
  id: z.string().uuid(),
  label: z.string(),
  clocks: z.array(z.string()),
  campaignIds: z.array(z.string().uuid()),
  commonStart: z.string(),
  commonEnd: z.string(),
  /** ε = Σ s·y + Σ s·ln R0 (dimensionless). */
  closure: z.number(),
  standardUncertainty: z.number(),
  expandedUncertainty: z.number(),
  coverageFactor: z.number(),
  coverageProbability: z.number(),
  en: z.number(),
  /** |E_n| ≤ 1. */
  agreed: z.boolean(),
  computedAt: z.string(),
});
export type ClosureSummary = z.infer<typeof closureSummarySchema>;

export const closureDetailSchema = closureSummarySchema.extend({
  inputHash: z.string(),
  softwareVersion: z.string(),
  legs: z.array(closureLegSchema),
  tau0Seconds: z.number(),
  commonSamples: z.number().int(),
  sumY: z.number(),
  referenceRatioTerm: z.number(),
  statisticalUncertainty: z.number().nullable(),
  statisticalMethod: z.string(),
  effectiveDegreesOfFreedom: z.number().nullable(),
  budget: z.array(closureBudgetLineSchema),
  series: z.array(z.object({ mjd: z.number(), z: z.number() })),
  method: z.object({ statement: z.string(), sources: z.array(z.string()), assumptions: z.array(z.string()), loopSearch: z.string() }),
  cautions: z.array(z.string()),
});
export type ClosureDetail = z.infer<typeof closureDetailSchema>;

export const closureListQuerySchema = pageQuerySchema.extend({
  sort: sortableBy(['commonStart', 'en', 'label']),
  failing: z.enum(['true', 'false']).optional(),
});
export type ClosureListQuery = z.infer<typeof closureListQuerySchema>;
