import crypto from 'node:crypto';
import type { DataSource, EntityManager } from 'typeorm';
import {
  speciesLabels,
  type BudgetRow,
  type CreateClock,
  type CreateLink,
  type CreateSite,
  type NewBudgetVersion,
  type ReferenceFrequencyInput,
  type RegistryListQuery,
  type SiteListQuery,
  type ClockListQuery,
  type LinkListQuery,
  type UpdateSite,
  type UploadQuasigeoidGrid,
  createClockSchema,
  createLinkSchema,
  createSiteSchema,
  newBudgetVersionSchema,
  referenceFrequencyInput,
  updateClockSchema,
  updateLinkSchema,
  updateReferenceFrequencySchema,
  updateSiteSchema,
  uploadQuasigeoidGridSchema,
} from '../../shared/registry';
import type { z } from 'zod';
import { recordAudit } from '../audit/audit.service';
import type { Actor } from '../auth/actor';
import { authorize, requireSameInstitute } from '../auth/permissions';
import {
  ClockBudgetVersionEntity,
  ClockDeploymentEntity,
  ClockEntity,
  FibreLinkEntity,
  QuasigeoidGridEntity,
  ReferenceFrequencyEntity,
  SiteEntity,
  type ClockBudgetVersionRow,
  type ClockRow,
  type FibreLinkRow,
  type QuasigeoidGridRow,
  type ReferenceFrequencyRow,
  type SiteRow,
} from '../db/entities/registry.entities';
import { Conflict, Forbidden, Invalid, NotFound } from '../http/errors';
import { ScienceInputError } from '../science/errors';
import { parsePositiveDecimal } from '../science/fractional-offset';
import { chordDistanceM, geodesicInverse, listCrs, resolveCrs, toGrs80Geodetic } from '../science/geodesy';
import { GridFormatError, interpolateQuasigeoidHeight, parseQuasigeoidGrid } from '../science/quasigeoid-grid';
import { rss } from '../science/uncertainty';

// Registry rules: who may change which site, clock or link; coordinates converted once at write time; budgets
// versioned append-only; reference frequencies kept by the coordinating institute.

type Body<S extends z.ZodTypeAny> = z.infer<S>;

/** Runs a science call and turns its input error into a 400 naming the request field. */
function science<T>(fn: () => T, fieldMap: Record<string, string>, fallback: string): T {
  try {
    return fn();
  } catch (e) {
    if (e instanceof GridFormatError) throw new Invalid(e.message, [{ path: fieldMap.content ?? fallback, message: e.message, ...(e.line ? { line: e.line } : {}) }]);
    if (e instanceof ScienceInputError) throw new Invalid(e.message, [{ path: Object.hasOwn(fieldMap, e.field) ? fieldMap[e.field] : fallback, message: e.message }]);
    throw e;
  }
}

/** Turns PostgreSQL's unique violation (23505) on a name into a 400 on body.name. */
async function uniqueName<T>(work: Promise<T>, message: string): Promise<T> {
  try {
    return await work;
  } catch (e) {
    const code = (e as { code?: string })?.code ?? (e as { driverError?: { code?: string } })?.driverError?.code;
    if (code === '23505') throw new Invalid(message, [{ path: 'body.name', message: 'already used' }]);
    throw e;
  }
}

// ---------- DTOs ----------

export function normalHeightOf(s: Pick<SiteRow, 'ellipsoidalHeightM' | 'ellipsoidalHeightUncertaintyM' | 'quasigeoidHeightM' | 'quasigeoidUncertaintyM'>) {
  return { valueM: s.ellipsoidalHeightM - s.quasigeoidHeightM, uncertaintyM: rss([s.ellipsoidalHeightUncertaintyM, s.quasigeoidUncertaintyM]) };
}

/** The stored columns of a local tie (Δh or ΔC, never both); null removes the tie. */
function tieColumns(tie: { benchmarkCode: string; heightDifferenceM?: number; uncertaintyM?: number; deltaC_m2s2?: number; uncertaintyC_m2s2?: number; source?: string } | null | undefined) {
  return {
    benchmarkCode: tie?.benchmarkCode ?? null,
    tieHeightDifferenceM: tie?.heightDifferenceM ?? null,
    tieUncertaintyM: tie?.heightDifferenceM !== undefined ? (tie.uncertaintyM ?? null) : null,
    tieDeltaC_m2s2: tie?.deltaC_m2s2 ?? null,
    tieUncertaintyC_m2s2: tie?.deltaC_m2s2 !== undefined ? (tie.uncertaintyC_m2s2 ?? null) : null,
    tieSource: tie?.source ?? null,
  };
}

export function toSiteDto(s: SiteRow, gridName: string | null = null) {
  let crsLabel = s.crs;
  let crsKind: ReturnType<typeof resolveCrs>['kind'] | null = null;
  try {
    const resolved = resolveCrs(s.crs);
    crsLabel = resolved.label;
    crsKind = resolved.kind;
  } catch {
    // a stored PROJ string that no longer parses still shows as entered
  }
  return {
    id: s.id,
    name: s.name,
    institute: { id: s.instituteId, code: s.institute?.code ?? '', name: s.institute?.name ?? '' },
    referencePoint: s.referencePoint,
    entered: { crs: s.crs, crsLabel, crsKind, coordinates: s.coordinates },
    grs80: {
      latitudeDeg: s.latitudeDeg,
      longitudeDeg: s.longitudeDeg,
      ellipsoidalHeightM: s.ellipsoidalHeightM,
      ellipsoidalHeightUncertaintyM: s.ellipsoidalHeightUncertaintyM,
      xM: s.xM,
      yM: s.yM,
      zM: s.zM,
    },
    assumptions: s.assumptions,
    quasigeoid: { source: s.quasigeoidSource, gridId: s.quasigeoidGridId, gridName, heightM: s.quasigeoidHeightM, uncertaintyM: s.quasigeoidUncertaintyM, tideSystem: s.quasigeoidTideSystem ?? null },
    ellipsoidalCrustSystem: s.ellipsoidalCrustSystem ?? null,
    normalHeight: { ...normalHeightOf(s), k: 1 as const, formula: 'H = h − ζ; u(H) = √(u(h)² + u(ζ)²)' },
    benchmarkTie:
      s.benchmarkCode === null ? null
        : s.tieDeltaC_m2s2 !== null
          ? { benchmarkCode: s.benchmarkCode, quantity: 'potential' as const, heightDifferenceM: null, uncertaintyM: null, deltaC_m2s2: s.tieDeltaC_m2s2, uncertaintyC_m2s2: s.tieUncertaintyC_m2s2 ?? 0, source: s.tieSource }
          : { benchmarkCode: s.benchmarkCode, quantity: 'height' as const, heightDifferenceM: s.tieHeightDifferenceM ?? 0, uncertaintyM: s.tieUncertaintyM ?? 0, deltaC_m2s2: null, uncertaintyC_m2s2: null, source: s.tieSource },
    createdAt: s.createdAt.toISOString(),
    updatedAt: s.updatedAt.toISOString(),
  };
}

export function toGridDto(g: QuasigeoidGridRow) {
  return {
    id: g.id,
    name: g.name,
    fileName: g.fileName,
    sha256: g.sha256,
    latitudeMinDeg: g.latitudeMinDeg,
    latitudeMaxDeg: g.latitudeMinDeg + (g.latitudeCount - 1) * g.latitudeStepDeg,
    longitudeMinDeg: g.longitudeMinDeg,
    longitudeMaxDeg: g.longitudeMinDeg + (g.longitudeCount - 1) * g.longitudeStepDeg,
    latitudeStepDeg: g.latitudeStepDeg,
    tideSystem: g.tideSystem ?? null,
    correlationLengthKm: g.correlationLengthKm ?? null,
    longitudeStepDeg: g.longitudeStepDeg,
    nodeCount: g.latitudeCount * g.longitudeCount,
    uncertaintyM: g.uncertaintyM,
    uploadedBy: g.uploadedBy,
    createdAt: g.createdAt.toISOString(),
  };
}

export function toBudgetDto(b: ClockBudgetVersionRow) {
  return {
    id: b.id,
    version: b.version,
    rows: b.rows,
    totalCorrection: b.totalCorrection,
    totalUncertainty: b.totalUncertainty,
    createdBy: b.createdBy,
    createdAt: b.createdAt.toISOString(),
    comment: b.comment,
    deploymentId: b.deploymentId ?? null,
  };
}

export function toClockDto(c: ClockRow, budget: ClockBudgetVersionRow | null) {
  return {
    id: c.id,
    name: c.name,
    kind: c.kind,
    species: c.species,
    speciesLabel: speciesLabels[c.species],
    nominalFrequencyHz: c.nominalFrequencyHz,
    notes: c.notes,
    mobility: c.mobility,
    site: { id: c.siteId, name: c.site?.name ?? '' },
    institute: { id: c.instituteId, code: c.institute?.code ?? '', name: c.institute?.name ?? '' },
    currentBudget: budget ? toBudgetDto(budget) : null,
    createdAt: c.createdAt.toISOString(),
  };
}

export function toReferenceDto(r: ReferenceFrequencyRow) {
  return {
    id: r.id,
    species: r.species,
    speciesLabel: speciesLabels[r.species],
    frequencyHz: r.frequencyHz,
    relativeUncertainty: r.relativeUncertainty,
    source: r.source,
    inUse: r.inUse,
    updatedAt: r.updatedAt.toISOString(),
  };
}

export function linkDistances(a: SiteRow, b: SiteRow) {
  const pa = { latitudeDeg: a.latitudeDeg, longitudeDeg: a.longitudeDeg, ellipsoidalHeightM: a.ellipsoidalHeightM };
  const pb = { latitudeDeg: b.latitudeDeg, longitudeDeg: b.longitudeDeg, ellipsoidalHeightM: b.ellipsoidalHeightM };
  return { geodesicDistanceKm: geodesicInverse(pa, pb).distanceM / 1000, chordDistanceKm: chordDistanceM(pa, pb) / 1000 };
}

export function toLinkDto(l: FibreLinkRow) {
  const a = l.siteA!;
  const b = l.siteB!;
  return {
    id: l.id,
    name: l.name,
    siteA: { id: a.id, name: a.name, instituteCode: a.institute?.code ?? '' },
    siteB: { id: b.id, name: b.name, instituteCode: b.institute?.code ?? '' },
    fibreLengthKm: l.fibreLengthKm,
    fractionalUncertainty: l.fractionalUncertainty,
    notes: l.notes,
    ...linkDistances(a, b),
    createdAt: l.createdAt.toISOString(),
  };
}

export function budgetTotals(rows: readonly BudgetRow[]) {
  return { totalCorrection: rows.reduce((s, r) => s + r.correction, 0), totalUncertainty: rss(rows.map((r) => r.uncertainty)) };
}

// ---------- helpers shared with campaigns ----------

export async function currentBudget(m: EntityManager, clock: Pick<ClockRow, 'id' | 'currentBudgetVersion'>): Promise<ClockBudgetVersionRow> {
  return m.getRepository(ClockBudgetVersionEntity).findOneByOrFail({ clockId: clock.id, version: clock.currentBudgetVersion });
}

function page<T>(q: RegistryListQuery, rows: T[], total: number) {
  return { items: rows, total, page: q.page, pageSize: q.pageSize };
}

function instituteFor(actor: Actor, requested: string | undefined): string {
  if (actor.role === 'operator') {
    if (requested && requested !== actor.instituteId) throw new Forbidden('Lab staff register sites for their own institute only.');
    return actor.instituteId!;
  }
  if (!requested) throw new Invalid('Name the institute that owns the site.', [{ path: 'body.instituteId', message: 'required for the coordinating institute' }]);
  return requested;
}

async function quasigeoidFor(m: EntityManager, input: Body<typeof createSiteSchema>['quasigeoid'], latDeg: number, lonDeg: number) {
  if (input.source === 'entered') return { quasigeoidSource: 'entered' as const, quasigeoidGridId: null, quasigeoidHeightM: input.heightM, quasigeoidUncertaintyM: input.uncertaintyM, quasigeoidTideSystem: input.tideSystem ?? null };
  const grid = await m.getRepository(QuasigeoidGridEntity).findOneBy({ id: input.gridId });
  if (!grid) throw new Invalid('Unknown quasigeoid grid.', [{ path: 'body.quasigeoid.gridId', message: 'no such grid' }]);
  const heightM = science(() => interpolateQuasigeoidHeight(grid, latDeg, lonDeg), { position: 'body.quasigeoid.gridId' }, 'body.quasigeoid.gridId');
  return { quasigeoidSource: 'grid' as const, quasigeoidGridId: grid.id, quasigeoidHeightM: heightM, quasigeoidUncertaintyM: grid.uncertaintyM, quasigeoidTideSystem: grid.tideSystem ?? null };
}

function converted(crs: string, coordinates: number[]) {
  const p = science(() => toGrs80Geodetic(crs, coordinates), { crs: 'body.crs', coords: 'body.coordinates' }, 'body.coordinates');
  if (!(Math.abs(p.latitudeDeg) <= 90) || !(Math.abs(p.longitudeDeg) <= 180) || !(Math.abs(p.ellipsoidalHeightM) < 20_000)) {
    throw new Invalid('The coordinates do not describe a point near the Earth’s surface.', [{ path: 'body.coordinates', message: 'outside the expected range after conversion' }]);
  }
  return {
    latitudeDeg: p.latitudeDeg,
    longitudeDeg: p.longitudeDeg,
    ellipsoidalHeightM: p.ellipsoidalHeightM,
    xM: p.x,
    yM: p.y,
    zM: p.z,
    assumptions: p.assumptions,
  };
}

// Sort names come from each list's zod enum; the column tables are Maps so no inherited name can ever match.
const siteSort = new Map<NonNullable<SiteListQuery['sort']>, string>([['name', 's.name'], ['institute', 'i.code'], ['latitudeDeg', 's.latitude_deg'], ['longitudeDeg', 's.longitude_deg'], ['ellipsoidalHeightM', 's.ellipsoidal_height_m'], ['updatedAt', 's.updated_at']]);
const clockSort = new Map<NonNullable<ClockListQuery['sort']>, string>([['name', 'c.name'], ['species', 'c.species'], ['kind', 'c.kind'], ['site', 's.name'], ['institute', 'i.code'], ['createdAt', 'c.created_at']]);
const linkSort = new Map<NonNullable<LinkListQuery['sort']>, string>([['name', 'l.name'], ['fibreLengthKm', 'l.fibre_length_km'], ['fractionalUncertainty', 'l.fractional_uncertainty'], ['createdAt', 'l.created_at']]);

export function createRegistryService(dataSource: DataSource) {
  async function loadSite(m: EntityManager, id: string) {
    const s = await m.getRepository(SiteEntity).findOne({ where: { id }, relations: { institute: true } });
    if (!s) throw new NotFound('Site');
    return s;
  }
  async function siteDto(m: EntityManager, s: SiteRow) {
    const grid = s.quasigeoidGridId ? await m.getRepository(QuasigeoidGridEntity).findOne({ where: { id: s.quasigeoidGridId }, select: { id: true, name: true } }) : null;
    return toSiteDto(s, grid?.name ?? null);
  }
  async function loadClock(m: EntityManager, id: string, lock = false) {
    const repo = m.getRepository(ClockEntity);
    if (lock) {
      const locked = await repo.createQueryBuilder('c').setLock('pessimistic_write').where('c.id = :id', { id }).getOne();
      if (!locked) throw new NotFound('Clock');
    }
    const c = await repo.findOne({ where: { id }, relations: { site: true, institute: true } });
    if (!c) throw new NotFound('Clock');
    return c;
  }
  async function loadLink(m: EntityManager, id: string) {
    const l = await m.getRepository(FibreLinkEntity).findOne({ where: { id }, relations: { siteA: { institute: true }, siteB: { institute: true } } });
    if (!l) throw new NotFound('Fibre link');
    return l;
  }
  function requireLinkInstitute(actor: Actor, a: SiteRow, b: SiteRow) {
    if (actor.role === 'operator' && actor.instituteId !== a.instituteId && actor.instituteId !== b.instituteId) {
      throw new Forbidden('Lab staff change fibre links that reach one of their own sites only.');
    }
  }

  return {
    crsList(actor: Actor) {
      authorize(actor, 'registry:read');
      return listCrs().map(({ code, label, kind }) => ({ code, label, kind }));
    },

    // ---------- sites ----------
    async listSites(actor: Actor, q: SiteListQuery) {
      authorize(actor, 'registry:read');
      const qb = dataSource.getRepository(SiteEntity).createQueryBuilder('s').leftJoinAndSelect('s.institute', 'i');
      if (q.q) qb.andWhere('(s.name ILIKE :q OR s.reference_point ILIKE :q OR i.code ILIKE :q)', { q: `%${q.q}%` });
      if (q.instituteId) qb.andWhere('s.institute_id = :inst', { inst: q.instituteId });
      qb.orderBy(siteSort.get(q.sort ?? 'name') ?? 's.name', q.order === 'desc' ? 'DESC' : 'ASC').addOrderBy('s.id');
      const [rows, total] = await qb.skip((q.page - 1) * q.pageSize).take(q.pageSize).getManyAndCount();
      return page(q, rows.map((s) => toSiteDto(s)), total);
    },
    async getSite(actor: Actor, id: string) {
      authorize(actor, 'registry:read');
      return dataSource.transaction(async (m) => siteDto(m, await loadSite(m, id)));
    },
    async createSite(actor: Actor, input: CreateSite) {
      authorize(actor, 'registry:write');
      const body = createSiteSchema.parse(input);
      const instituteId = instituteFor(actor, body.instituteId);
      return dataSource.transaction(async (m) => {
        const pos = converted(body.crs, body.coordinates);
        const zeta = await quasigeoidFor(m, body.quasigeoid, pos.latitudeDeg, pos.longitudeDeg);
        const repo = m.getRepository(SiteEntity);
        const saved = await uniqueName(repo.save(
          repo.create({
            instituteId,
            name: body.name,
            referencePoint: body.referencePoint,
            crs: resolveCrs(body.crs).code,
            coordinates: body.coordinates,
            ellipsoidalHeightUncertaintyM: body.ellipsoidalHeightUncertaintyM,
            ellipsoidalCrustSystem: body.ellipsoidalCrustSystem ?? null,
            ...pos,
            ...zeta,
            ...tieColumns(body.benchmarkTie),
          }),
        ), 'A site of this institute already has that name.');
        await recordAudit(m, actor, { action: 'site.created', entityType: 'site', entityId: saved.id, instituteId, details: { name: body.name, crs: body.crs, coordinates: body.coordinates } });
        return siteDto(m, await loadSite(m, saved.id));
      });
    },
    async updateSite(actor: Actor, id: string, input: UpdateSite) {
      authorize(actor, 'registry:write');
      const body = updateSiteSchema.parse(input);
      return dataSource.transaction(async (m) => {
        const s = await loadSite(m, id);
        requireSameInstitute(actor, s.instituteId);
        const before = toSiteDto(s);
        if (body.name !== undefined) s.name = body.name;
        if (body.referencePoint !== undefined) s.referencePoint = body.referencePoint;
        if (body.ellipsoidalHeightUncertaintyM !== undefined) s.ellipsoidalHeightUncertaintyM = body.ellipsoidalHeightUncertaintyM;
        if (body.ellipsoidalCrustSystem !== undefined) s.ellipsoidalCrustSystem = body.ellipsoidalCrustSystem;
        const moved = body.crs !== undefined || body.coordinates !== undefined;
        if (moved) {
          const crs = body.crs ?? s.crs;
          const coordinates = body.coordinates ?? s.coordinates;
          Object.assign(s, converted(crs, coordinates), { crs: resolveCrs(crs).code, coordinates });
        }
        if (body.quasigeoid) Object.assign(s, await quasigeoidFor(m, body.quasigeoid, s.latitudeDeg, s.longitudeDeg));
        else if (moved && s.quasigeoidGridId) Object.assign(s, await quasigeoidFor(m, { source: 'grid', gridId: s.quasigeoidGridId }, s.latitudeDeg, s.longitudeDeg));
        if (body.benchmarkTie !== undefined) {
          Object.assign(s, tieColumns(body.benchmarkTie));
        }
        await uniqueName(m.getRepository(SiteEntity).save(s), 'A site of this institute already has that name.');
        const after = await siteDto(m, await loadSite(m, id));
        await recordAudit(m, actor, { action: 'site.updated', entityType: 'site', entityId: id, instituteId: s.instituteId, details: { changed: Object.keys(body), before: { grs80: before.grs80, quasigeoid: before.quasigeoid }, after: { grs80: after.grs80, quasigeoid: after.quasigeoid } } });
        return after;
      });
    },

    // ---------- quasigeoid grids ----------
    async listGrids(actor: Actor) {
      authorize(actor, 'registry:read');
      const rows = await dataSource.getRepository(QuasigeoidGridEntity).find({ order: { createdAt: 'DESC' } });
      return rows.map(toGridDto);
    },
    async uploadGrid(actor: Actor, input: UploadQuasigeoidGrid) {
      authorize(actor, 'references:write');
      const body = uploadQuasigeoidGridSchema.parse(input);
      const grid = science(() => parseQuasigeoidGrid(body.content), { content: 'body.content' }, 'body.content');
      const sha256 = crypto.createHash('sha256').update(body.content).digest('hex');
      return dataSource.transaction(async (m) => {
        const repo = m.getRepository(QuasigeoidGridEntity);
        const existing = await repo.findOneBy({ sha256 });
        if (existing) throw new Conflict('This grid file was uploaded before.', { existingId: existing.id });
        const saved = await repo.save(repo.create({ name: body.name, fileName: body.fileName, sha256, uncertaintyM: body.uncertaintyM, tideSystem: body.tideSystem ?? null, correlationLengthKm: body.correlationLengthKm ?? null, uploadedBy: actor.displayName, ...grid, heightsM: Array.from(grid.heightsM) }));
        await recordAudit(m, actor, { action: 'quasigeoid-grid.uploaded', entityType: 'quasigeoid-grid', entityId: saved.id, details: { name: body.name, sha256, nodes: grid.latitudeCount * grid.longitudeCount } });
        return toGridDto(saved);
      });
    },

    // ---------- clocks ----------
    async listClocks(actor: Actor, q: ClockListQuery) {
      authorize(actor, 'registry:read');
      const qb = dataSource.getRepository(ClockEntity).createQueryBuilder('c').leftJoinAndSelect('c.site', 's').leftJoinAndSelect('c.institute', 'i');
      if (q.q) qb.andWhere('(c.name ILIKE :q OR c.species ILIKE :q OR s.name ILIKE :q OR i.code ILIKE :q)', { q: `%${q.q}%` });
      if (q.instituteId) qb.andWhere('c.institute_id = :inst', { inst: q.instituteId });
      if (q.siteId) qb.andWhere('c.site_id = :site', { site: q.siteId });
      qb.orderBy(clockSort.get(q.sort ?? 'name') ?? 'c.name', q.order === 'desc' ? 'DESC' : 'ASC').addOrderBy('c.id');
      const [rows, total] = await qb.skip((q.page - 1) * q.pageSize).take(q.pageSize).getManyAndCount();
      const budgets = rows.length
        ? await dataSource.getRepository(ClockBudgetVersionEntity).createQueryBuilder('b').innerJoin('clock', 'c', 'c.id = b.clock_id AND c.current_budget_version = b.version').where('b.clock_id IN (:...ids)', { ids: rows.map((r) => r.id) }).getMany()
        : [];
      const byClock = new Map(budgets.map((b) => [b.clockId, b]));
      return page(q, rows.map((c) => toClockDto(c, byClock.get(c.id) ?? null)), total);
    },
    async getClock(actor: Actor, id: string) {
      authorize(actor, 'registry:read');
      return dataSource.transaction(async (m) => {
        const c = await loadClock(m, id);
        return toClockDto(c, await currentBudget(m, c));
      });
    },
    async createClock(actor: Actor, input: CreateClock) {
      authorize(actor, 'registry:write');
      const body = createClockSchema.parse(input);
      science(() => parsePositiveDecimal(body.nominalFrequencyHz, 'nominalFrequencyHz', 20), { nominalFrequencyHz: 'body.nominalFrequencyHz' }, 'body.nominalFrequencyHz');
      return dataSource.transaction(async (m) => {
        const site = await m.getRepository(SiteEntity).findOneBy({ id: body.siteId });
        if (!site) throw new Invalid('Unknown site.', [{ path: 'body.siteId', message: 'no such site' }]);
        requireSameInstitute(actor, site.instituteId);
        const repo = m.getRepository(ClockEntity);
        const clock = await uniqueName(repo.save(repo.create({ siteId: site.id, instituteId: site.instituteId, name: body.name, kind: body.kind, species: body.species, nominalFrequencyHz: body.nominalFrequencyHz, notes: body.notes, mobility: body.mobility, currentBudgetVersion: 1 })), 'A clock with this name exists.');
        await m.getRepository(ClockBudgetVersionEntity).insert({ clockId: clock.id, version: 1, rows: body.budget, ...budgetTotals(body.budget), comment: 'first version', createdByUserId: actor.userId, createdBy: actor.displayName });
        await recordAudit(m, actor, { action: 'clock.created', entityType: 'clock', entityId: clock.id, instituteId: site.instituteId, details: { name: body.name, species: body.species, nominalFrequencyHz: body.nominalFrequencyHz, budgetRows: body.budget.length } });
        const fresh = await loadClock(m, clock.id);
        return toClockDto(fresh, await currentBudget(m, fresh));
      });
    },
    async updateClock(actor: Actor, id: string, input: Body<typeof updateClockSchema>) {
      authorize(actor, 'registry:write');
      const body = updateClockSchema.parse(input);
      if (body.nominalFrequencyHz !== undefined) {
        science(() => parsePositiveDecimal(body.nominalFrequencyHz!, 'nominalFrequencyHz', 20), { nominalFrequencyHz: 'body.nominalFrequencyHz' }, 'body.nominalFrequencyHz');
      }
      return dataSource.transaction(async (m) => {
        const c = await loadClock(m, id, true);
        requireSameInstitute(actor, c.instituteId);
        const before = { name: c.name, kind: c.kind, species: c.species, nominalFrequencyHz: c.nominalFrequencyHz, notes: c.notes, mobility: c.mobility };
        const patch = Object.fromEntries(Object.entries(body).filter(([, v]) => v !== undefined));
        await uniqueName(m.getRepository(ClockEntity).update({ id }, patch), 'A clock with this name exists.');
        await recordAudit(m, actor, { action: 'clock.updated', entityType: 'clock', entityId: id, instituteId: c.instituteId, details: { before, after: patch } });
        const fresh = await loadClock(m, id);
        return toClockDto(fresh, await currentBudget(m, fresh));
      });
    },
    async listBudgetVersions(actor: Actor, clockId: string) {
      authorize(actor, 'registry:read');
      const exists = await dataSource.getRepository(ClockEntity).existsBy({ id: clockId });
      if (!exists) throw new NotFound('Clock');
      const rows = await dataSource.getRepository(ClockBudgetVersionEntity).find({ where: { clockId }, order: { version: 'DESC' } });
      return rows.map(toBudgetDto);
    },
    async addBudgetVersion(actor: Actor, clockId: string, input: NewBudgetVersion) {
      authorize(actor, 'registry:write');
      const body = newBudgetVersionSchema.parse(input);
      return dataSource.transaction(async (m) => {
        const c = await loadClock(m, clockId, true);
        requireSameInstitute(actor, c.instituteId);
        const version = c.currentBudgetVersion + 1;
        const totals = budgetTotals(body.rows);
        if (body.deploymentId !== null && !(await m.getRepository(ClockDeploymentEntity).existsBy({ id: body.deploymentId, clockId }))) {
          throw new Invalid('Unknown deployment of this clock.', [{ path: 'body.deploymentId', message: 'no such deployment of this clock' }]);
        }
        await m.getRepository(ClockBudgetVersionEntity).insert({ clockId, version, rows: body.rows, ...totals, comment: body.comment, deploymentId: body.deploymentId, createdByUserId: actor.userId, createdBy: actor.displayName });
        await m.getRepository(ClockEntity).update({ id: clockId }, { currentBudgetVersion: version });
        await recordAudit(m, actor, { action: 'clock.budget-version-added', entityType: 'clock', entityId: clockId, instituteId: c.instituteId, details: { version, rows: body.rows.length, ...totals } });
        return toBudgetDto(await m.getRepository(ClockBudgetVersionEntity).findOneByOrFail({ clockId, version }));
      });
    },

    // ---------- reference frequencies ----------
    async listReferences(actor: Actor) {
      authorize(actor, 'registry:read');
      const rows = await dataSource.getRepository(ReferenceFrequencyEntity).find({ order: { species: 'ASC', inUse: 'DESC', updatedAt: 'DESC' } });
      return rows.map(toReferenceDto);
    },
    async createReference(actor: Actor, input: ReferenceFrequencyInput) {
      authorize(actor, 'references:write');
      const body = referenceFrequencyInput.parse(input);
      return dataSource.transaction(async (m) => {
        const repo = m.getRepository(ReferenceFrequencyEntity);
        if (body.inUse) await repo.update({ species: body.species, inUse: true }, { inUse: false });
        const saved = await repo.save(repo.create(body));
        await recordAudit(m, actor, { action: 'reference-frequency.created', entityType: 'reference-frequency', entityId: saved.id, details: { ...body } });
        return toReferenceDto(saved);
      });
    },
    async updateReference(actor: Actor, id: string, input: Body<typeof updateReferenceFrequencySchema>) {
      authorize(actor, 'references:write');
      const body = updateReferenceFrequencySchema.parse(input);
      return dataSource.transaction(async (m) => {
        const repo = m.getRepository(ReferenceFrequencyEntity);
        const r = await repo.findOneBy({ id });
        if (!r) throw new NotFound('Reference frequency');
        const before = toReferenceDto(r);
        Object.assign(r, Object.fromEntries(Object.entries(body).filter(([, v]) => v !== undefined)));
        if (r.inUse) await repo.createQueryBuilder().update().set({ inUse: false }).where('species = :s AND in_use AND id <> :id', { s: r.species, id }).execute();
        await repo.save(r);
        await recordAudit(m, actor, { action: 'reference-frequency.updated', entityType: 'reference-frequency', entityId: id, details: { before, after: body } });
        return toReferenceDto(r);
      });
    },

    // ---------- fibre links ----------
    async listLinks(actor: Actor, q: LinkListQuery) {
      authorize(actor, 'registry:read');
      const qb = dataSource
        .getRepository(FibreLinkEntity)
        .createQueryBuilder('l')
        .leftJoinAndSelect('l.siteA', 'sa')
        .leftJoinAndSelect('sa.institute', 'ia')
        .leftJoinAndSelect('l.siteB', 'sb')
        .leftJoinAndSelect('sb.institute', 'ib');
      if (q.q) qb.andWhere('(l.name ILIKE :q OR sa.name ILIKE :q OR sb.name ILIKE :q)', { q: `%${q.q}%` });
      if (q.instituteId) qb.andWhere('(sa.institute_id = :inst OR sb.institute_id = :inst)', { inst: q.instituteId });
      if (q.siteId) qb.andWhere('(l.site_a_id = :site OR l.site_b_id = :site)', { site: q.siteId });
      qb.orderBy(linkSort.get(q.sort ?? 'name') ?? 'l.name', q.order === 'desc' ? 'DESC' : 'ASC').addOrderBy('l.id');
      const [rows, total] = await qb.skip((q.page - 1) * q.pageSize).take(q.pageSize).getManyAndCount();
      return page(q, rows.map(toLinkDto), total);
    },
    async getLink(actor: Actor, id: string) {
      authorize(actor, 'registry:read');
      return dataSource.transaction(async (m) => toLinkDto(await loadLink(m, id)));
    },
    async createLink(actor: Actor, input: CreateLink) {
      authorize(actor, 'registry:write');
      const body = createLinkSchema.parse(input);
      if (body.siteAId === body.siteBId) throw new Invalid('A link joins two different sites.', [{ path: 'body.siteBId', message: 'must differ from site A' }]);
      return dataSource.transaction(async (m) => {
        const sites = await m.getRepository(SiteEntity).find({ where: [{ id: body.siteAId }, { id: body.siteBId }] });
        const a = sites.find((s) => s.id === body.siteAId);
        const b = sites.find((s) => s.id === body.siteBId);
        if (!a) throw new Invalid('Unknown site.', [{ path: 'body.siteAId', message: 'no such site' }]);
        if (!b) throw new Invalid('Unknown site.', [{ path: 'body.siteBId', message: 'no such site' }]);
        requireLinkInstitute(actor, a, b);
        const repo = m.getRepository(FibreLinkEntity);
        const saved = await uniqueName(repo.save(repo.create({ name: body.name, siteAId: a.id, siteBId: b.id, fibreLengthKm: body.fibreLengthKm, fractionalUncertainty: body.fractionalUncertainty, notes: body.notes })), 'A link with this name exists.');
        await recordAudit(m, actor, { action: 'link.created', entityType: 'fibre-link', entityId: saved.id, instituteId: actor.instituteId, details: { ...body } });
        return toLinkDto(await loadLink(m, saved.id));
      });
    },
    async updateLink(actor: Actor, id: string, input: Body<typeof updateLinkSchema>) {
      authorize(actor, 'registry:write');
      const body = updateLinkSchema.parse(input);
      return dataSource.transaction(async (m) => {
        const l = await loadLink(m, id);
        requireLinkInstitute(actor, l.siteA!, l.siteB!);
        const before = { name: l.name, fibreLengthKm: l.fibreLengthKm, fractionalUncertainty: l.fractionalUncertainty, notes: l.notes };
        const patch = Object.fromEntries(Object.entries(body).filter(([, v]) => v !== undefined));
        await uniqueName(m.getRepository(FibreLinkEntity).update({ id }, patch), 'A link with this name exists.');
        await recordAudit(m, actor, { action: 'link.updated', entityType: 'fibre-link', entityId: id, instituteId: actor.instituteId, details: { before, after: patch } });
        return toLinkDto(await loadLink(m, id));
      });
    },
  };
}
