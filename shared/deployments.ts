import { z } from 'zod';

// Deployments of transportable clocks (docs/transportable-clocks.md): where a clock stood from its arrival to its
// departure (none: still there). A stationary clock has no deployments and always stands at its registered site.

const isoDate = z.string().datetime({ offset: true });

export const clockMobilities = ['stationary', 'transportable'] as const;
export type ClockMobility = (typeof clockMobilities)[number];

export const createDeploymentSchema = z
  .object({
    siteId: z.string().uuid(),
    arrivedAt: isoDate,
    /** Omit or null: the clock is still there. */
    departedAt: isoDate.nullable().default(null),
    note: z.string().trim().max(2000).default(''),
  })
  .refine((d) => d.departedAt === null || Date.parse(d.departedAt) > Date.parse(d.arrivedAt), { path: ['departedAt'], message: 'must be after the arrival' });
export type CreateDeployment = z.input<typeof createDeploymentSchema>;

export const updateDeploymentSchema = z.object({
  siteId: z.string().uuid().optional(),
  arrivedAt: isoDate.optional(),
  departedAt: isoDate.nullable().optional(),
  note: z.string().trim().max(2000).optional(),
});
export type UpdateDeployment = z.infer<typeof updateDeploymentSchema>;

export const deploymentParamsSchema = z.object({ id: z.string().uuid(), deploymentId: z.string().uuid() });

export const deploymentSchema = z.object({
  id: z.string().uuid(),
  clock: z.object({ id: z.string().uuid(), name: z.string() }),
  site: z.object({ id: z.string().uuid(), name: z.string(), instituteCode: z.string() }),
  arrivedAt: z.string(),
  departedAt: z.string().nullable(),
  note: z.string(),
  /** Budget versions of the clock evaluated for this deployment. */
  budgetVersions: z.array(z.number().int()),
  createdBy: z.string(),
  createdAt: z.string(),
});
export type Deployment = z.infer<typeof deploymentSchema>;

export const clockDeploymentsSchema = z.object({
  clock: z.object({ id: z.string().uuid(), name: z.string(), mobility: z.enum(clockMobilities), homeSite: z.object({ id: z.string().uuid(), name: z.string() }) }),
  deployments: z.array(deploymentSchema),
  /** Whether the caller may add, change or remove deployments of this clock. */
  canWrite: z.boolean(),
});
export type ClockDeployments = z.infer<typeof clockDeploymentsSchema>;

/** Which clocks stood at a site and when (stationary clocks registered there appear without dates). */
export const siteClocksSchema = z.array(
  z.object({
    clock: z.object({ id: z.string().uuid(), name: z.string(), mobility: z.enum(clockMobilities) }),
    arrivedAt: z.string().nullable(),
    departedAt: z.string().nullable(),
    note: z.string(),
  }),
);
export type SiteClocks = z.infer<typeof siteClocksSchema>;

// ---------- pure helpers (shared by the server and the forms) ----------

export type DeploymentSpan = { siteId: string; arrivedAt: Date | string; departedAt: Date | string | null };

const ms = (d: Date | string) => (typeof d === 'string' ? Date.parse(d) : d.getTime());
const endMs = (d: Date | string | null) => (d === null ? Number.POSITIVE_INFINITY : ms(d));

/** Half-open intervals [arrival, departure) overlap: a departure and the next arrival may share an instant. */
export function deploymentsOverlap(a: DeploymentSpan, b: DeploymentSpan): boolean {
  return ms(a.arrivedAt) < endMs(b.departedAt) && ms(b.arrivedAt) < endMs(a.departedAt);
}

export type SiteDuring =
  | { ok: true; siteId: string }
  | { ok: false; reason: 'not-deployed'; message: string }
  | { ok: false; reason: 'moved'; message: string; siteIds: string[] };

/**
 * Where a transportable clock stood during [start, end]: the one deployment that covers the whole period, or why
 * there is none — it moved during the period (the period touches two deployments, or only part of one), or it
 * was deployed nowhere.
 */
export function siteDuring(deployments: readonly DeploymentSpan[], start: Date | string, end: Date | string): SiteDuring {
  const s = ms(start);
  const e = ms(end);
  const touching = deployments.filter((d) => ms(d.arrivedAt) < e && s < endMs(d.departedAt));
  const covering = touching.find((d) => ms(d.arrivedAt) <= s && endMs(d.departedAt) >= e);
  if (covering && touching.length === 1) return { ok: true, siteId: covering.siteId };
  if (touching.length === 0) return { ok: false, reason: 'not-deployed', message: 'The clock was not deployed at any site during the campaign period.' };
  return {
    ok: false,
    reason: 'moved',
    message: 'The clock moved during the campaign period (it was not at one site from the period start to its end).',
    siteIds: [...new Set(touching.map((d) => d.siteId))],
  };
}
