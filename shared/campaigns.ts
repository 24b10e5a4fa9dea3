import { z } from 'zod';
import { nameText, sortableBy } from './http';
import { budgetVersionSchema, decimalString, speciesSchema } from './registry';

// The campaign contract: two clocks compared over one fibre link during a period, with a reference ratio,
// pinned budget versions and a review state machine.

export const campaignStates = ['draft', 'submitted', 'in_review', 'accepted', 'returned', 'certified'] as const;
export type CampaignState = (typeof campaignStates)[number];
export const campaignStateLabels: Record<CampaignState, string> = {
  draft: 'Draft',
  submitted: 'Submitted',
  in_review: 'In review',
  accepted: 'Accepted',
  returned: 'Returned',
  certified: 'Certified',
};
/** States in which the owning lab may still change the campaign. */
export const editableStates: readonly CampaignState[] = ['draft', 'returned'];

const isoDate = z.string().datetime({ offset: true });

export const referenceRatioOverride = z.object({
  value: decimalString(40),
  relativeUncertainty: z.number().refine((v) => Number.isFinite(v) && v >= 0 && v < 1e-6, 'a relative uncertainty ≥ 0 and far below 1e-6'),
  justification: z.string().trim().min(10, 'explain in at least 10 characters why the default is replaced').max(2000),
});
export type ReferenceRatioOverride = z.infer<typeof referenceRatioOverride>;

/**
 * What a campaign may give instead of the default: its own value (value, relativeUncertainty, justification) or a
 * registered directly measured ratio (measuredRatioId, justification). One object so field errors keep their paths.
 */
export const referenceRatioChoice = z
  .object({
    measuredRatioId: z.string().uuid().optional(),
    value: referenceRatioOverride.shape.value.optional(),
    relativeUncertainty: referenceRatioOverride.shape.relativeUncertainty.optional(),
    justification: referenceRatioOverride.shape.justification,
  })
  .superRefine((v, ctx) => {
    if (v.measuredRatioId) {
      if (v.value !== undefined) ctx.addIssue({ code: 'custom', path: ['value'], message: 'give either a value or a measured ratio, not both' });
      return;
    }
    if (v.value === undefined) ctx.addIssue({ code: 'custom', path: ['value'], message: 'required (or choose a measured ratio)' });
    if (v.relativeUncertainty === undefined) ctx.addIssue({ code: 'custom', path: ['relativeUncertainty'], message: 'required' });
  });
export type ReferenceRatioChoice = z.infer<typeof referenceRatioChoice>;

export const campaignRoles = ['remote', 'side-by-side'] as const;
export type CampaignRole = (typeof campaignRoles)[number];
export const campaignRoleLabels: Record<CampaignRole, string> = { remote: 'Remote (clocks at different sites)', 'side-by-side': 'Side by side (offset between the clocks)' };

/**
 * The local tie of a side-by-side campaign, ΔC_local = C(site of B) − C(site of A): entered with its source, derived
 * from both sites' ties to one benchmark with a stated gravity, or zero when both clocks stand at the same site.
 */
export const localTieInput = z.discriminatedUnion('kind', [
  z.object({
    kind: z.literal('entered'),
    deltaC_m2s2: z.number().refine(Number.isFinite, 'must be a finite number').refine((v) => Math.abs(v) < 1000, 'a local tie is smaller than 1000 m²/s² (about 100 m)'),
    uncertainty_m2s2: z.number().refine((v) => Number.isFinite(v) && v >= 0, 'must not be negative'),
    source: nameText(3, 500),
  }),
  z.object({ kind: z.literal('benchmarks'), gravity_m_s2: z.number().min(9.7).max(9.9).default(9.81) }),
  z.object({ kind: z.literal('same-site') }),
]);
export type LocalTieInput = z.input<typeof localTieInput>;

const campaignFields = {
  name: nameText(2, 120),
  clockAId: z.string().uuid(),
  clockBId: z.string().uuid(),
  linkId: z.string().uuid(),
  periodStart: isoDate,
  periodEnd: isoDate,
  operatorNotes: z.string().trim().max(4000).default(''),
  /** Omit (or null) for the default: ν_B/ν_A from the reference-frequency table; or a registered measured ratio. */
  referenceRatio: referenceRatioChoice.nullable().default(null),
  role: z.enum(campaignRoles).default('remote'),
  /** Side-by-side only (required there; refused for a remote campaign). */
  localTie: localTieInput.nullable().default(null),
};

export const createCampaignSchema = z
  .object(campaignFields)
  .refine((c) => Date.parse(c.periodEnd) > Date.parse(c.periodStart), { path: ['periodEnd'], message: 'must be after the period start' })
  .refine((c) => c.clockAId !== c.clockBId, { path: ['clockBId'], message: 'clock B must differ from clock A' })
  .refine((c) => c.role === 'side-by-side' || c.localTie === null, { path: ['localTie'], message: 'only a side-by-side campaign has a local tie' });
export type CreateCampaign = z.input<typeof createCampaignSchema>;

export const updateCampaignSchema = z.object({
  name: campaignFields.name.optional(),
  linkId: campaignFields.linkId.optional(),
  periodStart: isoDate.optional(),
  periodEnd: isoDate.optional(),
  operatorNotes: z.string().trim().max(4000).optional(),
  referenceRatio: referenceRatioChoice.nullable().optional(),
  /** Re-pin the budgets to these versions (numbers); only while the campaign is editable. */
  budgetVersionA: z.number().int().min(1).optional(),
  budgetVersionB: z.number().int().min(1).optional(),
  role: z.enum(campaignRoles).optional(),
  localTie: localTieInput.nullable().optional(),
});
export type UpdateCampaign = z.infer<typeof updateCampaignSchema>;

/** What a reviewer confirms before accepting; each tick is audited. */
export const reviewChecklistItems = ['budgetVersionsPinned', 'referenceRatioSource', 'tideSystem', 'uploadsComplete'] as const;
export type ReviewChecklistItem = (typeof reviewChecklistItems)[number];
export const reviewChecklistLabels: Record<ReviewChecklistItem, string> = {
  budgetVersionsPinned: 'Both clocks’ budget versions are the ones this campaign should use (pinned)',
  referenceRatioSource: 'The reference ratio ν_B/ν_A and its source are right for these species',
  tideSystem: 'The tide system of the result matches the height datum it is compared with',
  uploadsComplete: 'Every ratio series of the campaign period is uploaded',
};
export const checklistTickSchema = z.object({ item: z.enum(reviewChecklistItems), checked: z.boolean() });

const reviewerComment = z.string().trim().min(5, 'write a comment of at least 5 characters for the record').max(2000);
/** A justification is required (server-side) when the campaign has review exceptions; otherwise it is ignored. */
export const justificationField = z.string().trim().min(10, 'explain in at least 10 characters why this is acceptable').max(4000).optional();
export const acceptCampaignSchema = z.object({ comment: reviewerComment, justification: justificationField });
export type AcceptCampaign = z.infer<typeof acceptCampaignSchema>;
export const issueCertificateSchema = z.object({ comment: reviewerComment, justification: justificationField });
export type IssueCertificateBody = z.infer<typeof issueCertificateSchema>;

export const reviewExceptionSchema = z.object({ code: z.enum(['no-result', 'no-comparison', 'en-not-agreed', 'low-uptime', 'closure-failing']), text: z.string() });
export type ReviewException = z.infer<typeof reviewExceptionSchema>;

export const returnCampaignSchema = z.object({ reason: z.string().trim().min(5, 'give the lab a reason').max(4000) });
export const transitionNoteSchema = z.object({ note: z.string().trim().max(2000).optional() });

export const referenceRatioSchema = z.object({
  value: z.string(),
  relativeUncertainty: z.number(),
  source: z.string(),
  isDefault: z.boolean(),
  justification: z.string().nullable(),
});
export type ReferenceRatio = z.infer<typeof referenceRatioSchema>;

const clockRef = z.object({
  id: z.string().uuid(),
  name: z.string(),
  species: speciesSchema,
  speciesLabel: z.string(),
  nominalFrequencyHz: z.string(),
  site: z.object({ id: z.string().uuid(), name: z.string() }),
  institute: z.object({ id: z.string().uuid(), code: z.string() }),
});

export const campaignEventSchema = z.object({
  at: z.string(),
  fromState: z.enum(campaignStates).nullable(),
  toState: z.enum(campaignStates),
  actor: z.string(),
  note: z.string().nullable(),
});
export type CampaignEvent = z.infer<typeof campaignEventSchema>;

export const campaignSummarySchema = z.object({
  id: z.string().uuid(),
  name: z.string(),
  state: z.enum(campaignStates),
  institute: z.object({ id: z.string().uuid(), code: z.string() }),
  clockA: clockRef,
  clockB: clockRef,
  link: z.object({ id: z.string().uuid(), name: z.string() }),
  periodStart: z.string(),
  periodEnd: z.string(),
  role: z.enum(campaignRoles),
  /** Where clock A and clock B stood during the period (from their deployments). */
  siteA: z.object({ id: z.string().uuid(), name: z.string() }),
  siteB: z.object({ id: z.string().uuid(), name: z.string() }),
  updatedAt: z.string(),
});
export type CampaignSummary = z.infer<typeof campaignSummarySchema>;

export const campaignSchema = campaignSummarySchema.extend({
  operatorNotes: z.string(),
  referenceRatio: referenceRatioSchema,
  /** Side-by-side: ΔC_local = C(site B) − C(site A) [m²/s²], standard uncertainty (k = 1) and source; null for remote. */
  localTie: z.object({ deltaC_m2s2: z.number(), uncertainty_m2s2: z.number(), source: z.string() }).nullable(),
  budgetA: budgetVersionSchema,
  budgetB: budgetVersionSchema,
  currentBudgetVersionA: z.number().int(),
  currentBudgetVersionB: z.number().int(),
  returnReason: z.string().nullable(),
  createdBy: z.string(),
  createdAt: z.string(),
  timeline: z.array(campaignEventSchema),
  review: z.object({
    checklist: z.array(z.object({ item: z.enum(reviewChecklistItems), label: z.string(), checked: z.boolean(), by: z.string().nullable(), at: z.string().nullable() })),
    /** From the newest stored result (none is computed by reading); accepting computes it afresh and checks again. */
    exceptions: z.array(reviewExceptionSchema),
    resultComputed: z.boolean(),
    minUptimeFraction: z.number(),
    fourEyes: z.boolean(),
    acceptedBy: z.string().nullable(),
    acceptedAt: z.string().nullable(),
    acceptanceComment: z.string().nullable(),
    acceptanceJustification: z.string().nullable(),
    acceptanceExceptions: z.array(z.string()),
  }),
  /** What the caller may do now (drives the buttons; the server checks again). */
  allowed: z.object({ edit: z.boolean(), submit: z.boolean(), startReview: z.boolean(), accept: z.boolean(), return: z.boolean(), tick: z.boolean() }),
});
export type Campaign = z.infer<typeof campaignSchema>;

export const campaignSortFields = ['name', 'state', 'periodStart', 'periodEnd', 'updatedAt', 'institute'] as const;
export const campaignListQuery = z.object({
  page: z.coerce.number().int().min(1).default(1),
  pageSize: z.coerce.number().int().min(1).max(500).default(25),
  sort: sortableBy(campaignSortFields),
  order: z.enum(['asc', 'desc']).default('asc'),
  q: z.string().max(200).optional(),
  state: z.enum(campaignStates).optional(),
});
export type CampaignListQuery = z.infer<typeof campaignListQuery>;

export const defaultRatioQuery = z.object({ clockAId: z.string().uuid(), clockBId: z.string().uuid() });
