import { z } from 'zod';
import { nameText, patchOf, sortableBy } from './http';

// The registry contract: sites, quasigeoid grids, clocks with versioned systematic budgets, reference
// frequencies and fibre links. Frequencies travel as decimal strings, never JSON numbers.

/** Positive decimal written as a string; `maxDigits` significant digits at most. */
export function decimalString(maxDigits: number) {
  return z
    .string()
    .trim()
    .regex(/^(\d+(\.\d*)?|\.\d+)([eE][+-]?\d{1,3})?$/, 'a positive decimal number written as a string, e.g. "429228004229873.0"')
    .refine((s) => significantDigits(s) <= maxDigits, `at most ${maxDigits} significant digits`)
    .refine((s) => Number(s) > 0, 'must be greater than zero');
}

function significantDigits(text: string): number {
  const mantissa = text.split(/[eE]/)[0];
  const digits = mantissa.replace('.', '').replace(/^0+/, '');
  return Math.max((mantissa.includes('.') ? digits : digits.replace(/0+$/, '')).length, 1);
}

const finite = z.number().refine(Number.isFinite, 'must be a finite number');
const nonNegative = finite.refine((v) => v >= 0, 'must not be negative');
const optionalText = (max: number) => z.string().trim().max(max).nullable().default(null);

// ---------- sites ----------

export const crsEntrySchema = z.object({ code: z.string(), label: z.string(), kind: z.enum(['geographic2D', 'geographic3D', 'geocentric', 'projected']) });
export type CrsEntry = z.infer<typeof crsEntrySchema>;

/** Permanent-tide systems (Ekman 1989; Mäkinen & Ihde 2009). For ellipsoidal heights the crust system: mean-tide = zero-tide crust. */
export const registryTideSystems = ['mean-tide', 'zero-tide', 'tide-free'] as const;
const tideSystemField = z.enum(registryTideSystems).nullable().optional();

const quasigeoidInput = z.discriminatedUnion('source', [
  z.object({
    source: z.literal('entered'), heightM: finite.refine((v) => Math.abs(v) < 200, 'quasigeoid heights lie within ±200 m'), uncertaintyM: nonNegative,
    /** Tide system of the entered ζ; absent = not stated (then no comparison uses it). */
    tideSystem: tideSystemField,
  }),
  z.object({ source: z.literal('grid'), gridId: z.string().uuid() }),
]);

/**
 * A local tie from a benchmark to the site's reference point: either the height difference Δh (m, σ in m) or the
 * geopotential-number difference ΔC = C_site − C_benchmark (m²/s², σ in m²/s²; C = W₀ − W, so ΔC ≈ γ·Δh, positive
 * when the site is higher). A ΔC tie names its source.
 */
const benchmarkTieInput = z
  .object({
    benchmarkCode: nameText(1, 60),
    heightDifferenceM: finite.refine((v) => Math.abs(v) < 10_000, 'a local tie is shorter than 10 km of height').optional(),
    uncertaintyM: nonNegative.optional(),
    deltaC_m2s2: finite.refine((v) => Math.abs(v) < 100_000, 'a local tie is shorter than 10 km of height (|ΔC| < 100 000 m²/s²)').optional(),
    uncertaintyC_m2s2: nonNegative.optional(),
    source: nameText(2, 300).optional(),
  })
  .superRefine((t, ctx) => {
    const byHeight = t.heightDifferenceM !== undefined;
    const byPotential = t.deltaC_m2s2 !== undefined;
    if (byHeight === byPotential) ctx.addIssue({ code: 'custom', path: ['heightDifferenceM'], message: 'give either Δh (heightDifferenceM) or ΔC (deltaC_m2s2), not both or neither' });
    if (byHeight && t.uncertaintyM === undefined) ctx.addIssue({ code: 'custom', path: ['uncertaintyM'], message: 'σ(Δh) is required with Δh' });
    if (byPotential && t.uncertaintyC_m2s2 === undefined) ctx.addIssue({ code: 'custom', path: ['uncertaintyC_m2s2'], message: 'σ(ΔC) is required with ΔC' });
    if (byPotential && t.source === undefined) ctx.addIssue({ code: 'custom', path: ['source'], message: 'a ΔC tie names its source' });
    if (byHeight && t.uncertaintyC_m2s2 !== undefined) ctx.addIssue({ code: 'custom', path: ['uncertaintyC_m2s2'], message: 'σ(ΔC) belongs to a ΔC tie' });
    if (byPotential && t.uncertaintyM !== undefined) ctx.addIssue({ code: 'custom', path: ['uncertaintyM'], message: 'σ(Δh) belongs to a Δh tie' });
  })
  .nullable()
  .default(null);

export const createSiteSchema = z.object({
  name: nameText(2, 120),
  instituteId: z.string().uuid().optional(),
  referencePoint: z.string().trim().min(2).max(1000),
  crs: nameText(3, 500),
  coordinates: z.array(finite).min(2).max(3),
  ellipsoidalHeightUncertaintyM: nonNegative.default(0),
  /** Crust system of the ellipsoidal height (GNSS in ITRF: tide-free); absent = not stated. */
  ellipsoidalCrustSystem: tideSystemField,
  quasigeoid: quasigeoidInput,
  benchmarkTie: benchmarkTieInput,
});
export type CreateSite = z.input<typeof createSiteSchema>;
export const updateSiteSchema = patchOf(createSiteSchema.omit({ instituteId: true }));
export type UpdateSite = z.input<typeof updateSiteSchema>;

export const siteSchema = z.object({
  id: z.string().uuid(),
  name: z.string(),
  institute: z.object({ id: z.string().uuid(), code: z.string(), name: z.string() }),
  referencePoint: z.string(),
  entered: z.object({
    crs: z.string(),
    crsLabel: z.string(),
    /** How to name the entered values (axes and units); null when the stored CRS no longer resolves. */
    crsKind: z.enum(['geographic2D', 'geographic3D', 'geocentric', 'projected']).nullable(),
    coordinates: z.array(z.number()),
  }),
  grs80: z.object({
    latitudeDeg: z.number(),
    longitudeDeg: z.number(),
    ellipsoidalHeightM: z.number(),
    ellipsoidalHeightUncertaintyM: z.number(),
    xM: z.number(),
    yM: z.number(),
    zM: z.number(),
  }),
  assumptions: z.array(z.string()),
  quasigeoid: z.object({
    source: z.enum(['entered', 'grid']), gridId: z.string().nullable(), gridName: z.string().nullable(), heightM: z.number(), uncertaintyM: z.number(),
    tideSystem: z.enum(registryTideSystems).nullable().optional(),
  }),
  /** Crust system of the ellipsoidal height (null: not stated). */
  ellipsoidalCrustSystem: z.enum(registryTideSystems).nullable().optional(),
  normalHeight: z.object({ valueM: z.number(), uncertaintyM: z.number(), k: z.literal(1), formula: z.string() }),
  benchmarkTie: z.object({
    benchmarkCode: z.string(),
    quantity: z.enum(['height', 'potential']),
    heightDifferenceM: z.number().nullable(), uncertaintyM: z.number().nullable(),
    deltaC_m2s2: z.number().nullable(), uncertaintyC_m2s2: z.number().nullable(),
    source: z.string().nullable(),
  }).nullable(),
  createdAt: z.string(),
  updatedAt: z.string(),
});
export type Site = z.infer<typeof siteSchema>;

// ---------- quasigeoid grids ----------

export const uploadQuasigeoidGridSchema = z.object({
  name: nameText(2, 120),
  uncertaintyM: nonNegative,
  /** Tide system of the grid's heights; absent = not stated. */
  tideSystem: tideSystemField,
  /** Correlation length of the grid's errors [km]; absent: the stated default (100 km). */
  correlationLengthKm: z.number().positive().max(100_000).nullable().optional(),
  fileName: nameText(0, 200).nullable().default(null),
  content: z.string().min(1).max(20_000_000),
});
export type UploadQuasigeoidGrid = z.input<typeof uploadQuasigeoidGridSchema>;

export const quasigeoidGridSchema = z.object({
  id: z.string().uuid(),
  name: z.string(),
  fileName: z.string().nullable(),
  sha256: z.string(),
  latitudeMinDeg: z.number(),
  latitudeMaxDeg: z.number(),
  longitudeMinDeg: z.number(),
  longitudeMaxDeg: z.number(),
  latitudeStepDeg: z.number(),
  longitudeStepDeg: z.number(),
  nodeCount: z.number().int(),
  uncertaintyM: z.number(),
  tideSystem: z.enum(registryTideSystems).nullable().optional(),
  correlationLengthKm: z.number().nullable().optional(),
  uploadedBy: z.string(),
  createdAt: z.string(),
});
export type QuasigeoidGrid = z.infer<typeof quasigeoidGridSchema>;

// ---------- clocks ----------

export const clockKinds = ['optical_lattice', 'single_ion', 'microwave_fountain', 'hydrogen_maser'] as const;
export const clockKindLabels: Record<(typeof clockKinds)[number], string> = {
  optical_lattice: 'Optical lattice clock',
  single_ion: 'Single-ion clock',
  microwave_fountain: 'Microwave fountain',
  hydrogen_maser: 'Hydrogen maser',
};

export const speciesCodes = ['Sr87', 'Sr88', 'Yb171', 'Yb171+E3', 'Yb171+E2', 'Ca40+', 'Al27+', 'Hg199', 'Cs133', 'H-maser'] as const;
export type SpeciesCode = (typeof speciesCodes)[number];
export const speciesLabels: Record<SpeciesCode, string> = {
  Sr87: '⁸⁷Sr 5s² ¹S₀–5s5p ³P₀',
  Sr88: '⁸⁸Sr 5s² ¹S₀–5s5p ³P₀',
  Yb171: '¹⁷¹Yb 6s² ¹S₀–6s6p ³P₀',
  'Yb171+E3': '¹⁷¹Yb⁺ ²S₁/₂–²F₇/₂ (E3)',
  'Yb171+E2': '¹⁷¹Yb⁺ ²S₁/₂–²D₃/₂ (E2)',
  'Ca40+': '⁴⁰Ca⁺ 4s ²S₁/₂–3d ²D₅/₂',
  'Al27+': '²⁷Al⁺ ¹S₀–³P₀',
  Hg199: '¹⁹⁹Hg 6s² ¹S₀–6s6p ³P₀',
  Cs133: '¹³³Cs ground-state hyperfine',
  'H-maser': 'H maser (hydrogen hyperfine)',
};
export const speciesSchema = z.enum(speciesCodes);

export const budgetRowSchema = z.object({
  effect: nameText(1, 120),
  correction: finite.refine((v) => Math.abs(v) < 1e-6, 'a fractional correction is far below 1e-6'),
  uncertainty: nonNegative.refine((v) => v < 1e-6, 'a fractional uncertainty is far below 1e-6'),
  type: z.enum(['A', 'B']),
  note: z.string().trim().max(500).default(''),
});
export type BudgetRow = z.infer<typeof budgetRowSchema>;
export const budgetRowsSchema = z.array(budgetRowSchema).max(80);

export const budgetVersionSchema = z.object({
  id: z.string().uuid(),
  version: z.number().int(),
  rows: z.array(budgetRowSchema),
  totalCorrection: z.number(),
  totalUncertainty: z.number(),
  createdBy: z.string(),
  createdAt: z.string(),
  comment: z.string().nullable(),
  /** The deployment this evaluation was made for; null: not tied to one. */
  deploymentId: z.string().uuid().nullable(),
});
export type BudgetVersion = z.infer<typeof budgetVersionSchema>;

export const createClockSchema = z.object({
  siteId: z.string().uuid(),
  name: nameText(2, 80),
  kind: z.enum(clockKinds),
  species: speciesSchema,
  nominalFrequencyHz: decimalString(20),
  notes: z.string().trim().max(2000).default(''),
  /** Stationary: always at its site. Transportable: the site is its home base; where it stood when is in its deployments. */
  mobility: z.enum(['stationary', 'transportable']).default('stationary'),
  budget: budgetRowsSchema.default([]),
});
export type CreateClock = z.input<typeof createClockSchema>;
export const updateClockSchema = patchOf(createClockSchema.omit({ siteId: true, budget: true }));
export const newBudgetVersionSchema = z.object({
  rows: budgetRowsSchema,
  comment: optionalText(500),
  /** The deployment of this clock the evaluation was made for (a transportable clock re-evaluated at a remote site). */
  deploymentId: z.string().uuid().nullable().default(null),
});
export type NewBudgetVersion = z.input<typeof newBudgetVersionSchema>;

export const clockSchema = z.object({
  id: z.string().uuid(),
  name: z.string(),
  kind: z.enum(clockKinds),
  species: speciesSchema,
  speciesLabel: z.string(),
  nominalFrequencyHz: z.string(),
  notes: z.string(),
  mobility: z.enum(['stationary', 'transportable']),
  site: z.object({ id: z.string().uuid(), name: z.string() }),
  institute: z.object({ id: z.string().uuid(), code: z.string(), name: z.string() }),
  currentBudget: budgetVersionSchema.nullable(),
  createdAt: z.string(),
});
export type Clock = z.infer<typeof clockSchema>;

// ---------- reference frequencies ----------

export const referenceFrequencyInput = z.object({
  species: speciesSchema,
  frequencyHz: decimalString(34),
  relativeUncertainty: nonNegative.refine((v) => v < 1e-6, 'a relative uncertainty far below 1e-6'),
  source: z.string().trim().min(3).max(1000),
  inUse: z.boolean().default(true),
});
export type ReferenceFrequencyInput = z.input<typeof referenceFrequencyInput>;
export const updateReferenceFrequencySchema = patchOf(referenceFrequencyInput);
export const referenceFrequencySchema = z.object({
  id: z.string().uuid(),
  species: speciesSchema,
  speciesLabel: z.string(),
  frequencyHz: z.string(),
  relativeUncertainty: z.number(),
  source: z.string(),
  inUse: z.boolean(),
  updatedAt: z.string(),
});
export type ReferenceFrequency = z.infer<typeof referenceFrequencySchema>;

// ---------- fibre links ----------

export const createLinkSchema = z.object({
  name: nameText(2, 120),
  siteAId: z.string().uuid(),
  siteBId: z.string().uuid(),
  fibreLengthKm: finite.refine((v) => v > 0 && v < 20_000, 'between 0 and 20 000 km'),
  fractionalUncertainty: nonNegative.refine((v) => v < 1e-9, 'a link fractional uncertainty far below 1e-9'),
  notes: z.string().trim().max(2000).default(''),
});
export type CreateLink = z.input<typeof createLinkSchema>;
export const updateLinkSchema = patchOf(createLinkSchema.omit({ siteAId: true, siteBId: true }));

export const linkSchema = z.object({
  id: z.string().uuid(),
  name: z.string(),
  siteA: z.object({ id: z.string().uuid(), name: z.string(), instituteCode: z.string() }),
  siteB: z.object({ id: z.string().uuid(), name: z.string(), instituteCode: z.string() }),
  fibreLengthKm: z.number(),
  fractionalUncertainty: z.number(),
  notes: z.string(),
  geodesicDistanceKm: z.number(),
  chordDistanceKm: z.number(),
  createdAt: z.string(),
});
export type Link = z.infer<typeof linkSchema>;

export const registryListQuery = z.object({
  page: z.coerce.number().int().min(1).default(1),
  pageSize: z.coerce.number().int().min(1).max(500).default(25),
  order: z.enum(['asc', 'desc']).default('asc'),
  q: z.string().max(200).optional(),
  instituteId: z.string().uuid().optional(),
  siteId: z.string().uuid().optional(),
});
export type RegistryListQuery = z.infer<typeof registryListQuery>;
export const siteSortFields = ['name', 'institute', 'latitudeDeg', 'longitudeDeg', 'ellipsoidalHeightM', 'updatedAt'] as const;
export const clockSortFields = ['name', 'species', 'kind', 'site', 'institute', 'createdAt'] as const;
export const linkSortFields = ['name', 'fibreLengthKm', 'fractionalUncertainty', 'createdAt'] as const;
export const siteListQuery = registryListQuery.extend({ sort: sortableBy(siteSortFields) });
export const clockListQuery = registryListQuery.extend({ sort: sortableBy(clockSortFields) });
export const linkListQuery = registryListQuery.extend({ sort: sortableBy(linkSortFields) });
export type SiteListQuery = z.infer<typeof siteListQuery>;
export type ClockListQuery = z.infer<typeof clockListQuery>;
export type LinkListQuery = z.infer<typeof linkListQuery>;
