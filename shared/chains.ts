import { z } from 'zod';
import { nameText, patchOf, sortableBy } from './http';

// Calibration chains: a remote comparison of a transportable clock T with one or two side-by-side calibrations of T
// against the same reference clock. docs/science.md, "Calibration chains".

const campaignRef = z.object({
  id: z.string().uuid(), name: z.string(), role: z.enum(['remote', 'side-by-side']), state: z.string(),
  periodStart: z.string(), periodEnd: z.string(), siteAId: z.string().uuid(), siteBId: z.string().uuid(),
});
const clockRef = z.object({ id: z.string().uuid(), name: z.string(), instituteCode: z.string() });

export const chainSchema = z.object({
  id: z.string().uuid(),
  name: z.string(),
  instituteId: z.string().uuid(),
  instituteCode: z.string(),
  transportableClock: clockRef,
  referenceClock: clockRef,
  remoteCampaign: campaignRef,
  beforeCampaign: campaignRef.nullable(),
  afterCampaign: campaignRef.nullable(),
  /** Entered transport reproducibility, fractional standard uncertainty; null: from the before/after difference. */
  transportReproducibility: z.number().nullable(),
  transportReproducibilitySource: z.string().nullable(),
  notes: z.string(),
  /** accepted: every campaign of the chain is accepted or certified (then the chain enters the adjustment). */
  state: z.enum(['accepted', 'pending']),
  createdBy: z.string(),
  createdAt: z.string(),
  updatedAt: z.string(),
});
export type Chain = z.infer<typeof chainSchema>;

export const chainSortFields = ['name', 'createdAt', 'updatedAt'] as const;
export const chainListQuery = z.object({
  page: z.coerce.number().int().min(1).default(1),
  pageSize: z.coerce.number().int().min(1).max(500).default(25),
  sort: sortableBy(chainSortFields),
  order: z.enum(['asc', 'desc']).default('asc'),
  q: z.string().max(200).optional(),
});
export type ChainListQuery = z.infer<typeof chainListQuery>;

const chainFields = {
  name: nameText(3, 160),
  transportableClockId: z.string().uuid(),
  referenceClockId: z.string().uuid(),
  remoteCampaignId: z.string().uuid(),
  beforeCampaignId: z.string().uuid().nullable().default(null),
  afterCampaignId: z.string().uuid().nullable().default(null),
  transportReproducibility: z.number().refine((v) => Number.isFinite(v) && v >= 0 && v < 1e-12, 'a fractional standard uncertainty ≥ 0 and below 1e-12').nullable().default(null),
  transportReproducibilitySource: z.string().trim().min(3).max(500).nullable().default(null),
  notes: z.string().trim().max(4000).default(''),
};
export const createChainSchema = z.object(chainFields).strict();
export type CreateChain = z.infer<typeof createChainSchema>;
export const updateChainSchema = patchOf(z.object(chainFields)).strict();
export type UpdateChain = z.infer<typeof updateChainSchema>;

const expanded = z.object({
  value: z.number(), standardUncertainty: z.number(), expandedUncertainty: z.number(), coverageFactor: z.number(),
  coverageProbability: z.number(), effectiveDegreesOfFreedom: z.number().nullable(), unit: z.string(),
});

export const chainBudgetLineSchema = z.object({
  key: z.string(), label: z.string(), type: z.enum(['A', 'B']), unit: z.string(), standardUncertainty: z.number(),
  sensitivity_m2s2: z.number(), contribution_m2s2: z.number(), varianceShare: z.number(), degreesOfFreedom: z.number().nullable(),
  enters: z.array(z.object({ comparisonId: z.string(), comparison: z.string(), sensitivity: z.number() })),
  cancels: z.boolean(),
});

export const chainResultSchema = z.object({
  chainId: z.string().uuid(),
  chainName: z.string(),
  inputs: z.array(z.object({ campaignId: z.string().uuid(), campaign: z.string(), part: z.enum(['remote', 'before', 'after']), resultId: z.string().uuid(), computedAt: z.string(), y: z.number(), standardUncertaintyY: z.number(), transportableIs: z.enum(['A', 'B']) })),
  fromSite: z.object({ id: z.string().uuid(), name: z.string() }),
  toSite: z.object({ id: z.string().uuid(), name: z.string() }),
  yRemote: z.number(),
  ySideBySide: z.number(),
  yChain: z.number(),
  deltaC_m2s2: expanded,
  deltaH_m: expanded.extend({ method: z.string() }),
  calibrations: z.array(z.object({ which: z.enum(['before', 'after']), comparisonId: z.string(), offset: z.number(), unsharedUncertainty: z.number(), weight: z.number(), localTie: z.object({ deltaC_m2s2: z.number(), standardUncertainty_m2s2: z.number(), source: z.string() }).nullable() })),
  transport: z.object({ standardUncertainty: z.number(), origin: z.enum(['entered', 'before-after']), source: z.string(), degreesOfFreedom: z.number().nullable() }),
  beforeAfter: z.object({ difference: z.number(), standardUncertainty: z.number(), expandedUncertainty: z.number(), coverageFactor: z.literal(2), en: z.number(), agreed: z.boolean(), statement: z.string() }).nullable(),
  lines: z.array(chainBudgetLineSchema),
  covariances: z.array(z.object({ comparisonId: z.string(), covariance_m4s4: z.number(), correlation: z.number() })),
  /** For the network adjustment: the part of u_c not shared with other comparisons, and the shared inputs that remain. */
  own_m2s2: z.number(),
  shared: z.array(z.object({ key: z.string(), label: z.string(), sigma_m2s2: z.number(), coefficient: z.number() })),
  tideSystem: z.literal('mean-tide'),
  cancellation: z.string(),
  method: z.object({ statement: z.string(), sources: z.array(z.string()) }),
  assumptions: z.array(z.string()),
  cautions: z.array(z.string()),
});
export type ChainResult = z.infer<typeof chainResultSchema>;

export const chainCsvColumns = ['section', 'quantity', 'value', 'standard_uncertainty', 'expanded_uncertainty', 'unit', 'note'] as const;

/** What the create form may offer: transportable clocks, and the campaigns of them you may see with their roles. */
export const chainCandidatesSchema = z.object({
  clocks: z.array(z.object({ id: z.string().uuid(), name: z.string(), instituteCode: z.string(), mobility: z.enum(['stationary', 'transportable']) })),
  campaigns: z.array(z.object({
    id: z.string().uuid(), name: z.string(), role: z.enum(['remote', 'side-by-side']), state: z.string(),
    clockAId: z.string().uuid(), clockBId: z.string().uuid(), clockAName: z.string(), clockBName: z.string(), periodStart: z.string(), periodEnd: z.string(),
  })),
});
export type ChainCandidates = z.infer<typeof chainCandidatesSchema>;
