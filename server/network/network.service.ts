import type { DataSource, EntityManager } from 'typeorm';
import type { PageQuery } from '../../shared/http';
import type { benchmarkSortFields, sectionSortFields } from '../../shared/network';

type BenchmarkSortField = (typeof benchmarkSortFields)[number];
type SectionSortField = (typeof sectionSortFields)[number];
import {
  type Benchmark, type BenchmarkInput, type HeightDatum, type HeightDatumInput, type LoopReport, type Section, type SectionInput,
} from '../../shared/network';
import { recordAudit } from '../audit/audit.service';
import type { Actor } from '../auth/actor';
import { authorize } from '../auth/permissions';
import {
  BenchmarkEntity, HeightDatumEntity, LevellingSectionEntity, type BenchmarkRow, type HeightDatumRow, type LevellingSectionRow,
} from '../db/entities/network.entities';
import { Conflict, Invalid, NotFound, type FieldIssue } from '../http/errors';
import { loopMisclosures } from '../science/adjustment/loops';
import { ScienceInputError } from '../science/errors';
import { resolveCrs, toGrs80Geodetic } from '../science/geodesy';
import { cFromNormalHeight, meanNormalGravity, normalGravityAtHeight, normalHeightFromC } from '../science/normal-gravity';

// Height datums, benchmarks, levelling sections and loop misclosures: rules, transactions, audit, DTOs.

export function toDatumDto(d: HeightDatumRow, benchmarkCount = 0): HeightDatum {
  return {
    id: d.id, name: d.name, tideSystem: d.tideSystem, realisationEpoch: d.realisationEpoch,
    loopToleranceMmPerSqrtKm: d.loopToleranceMmPerSqrtKm, sectionToleranceMmPerSqrtKm: d.sectionToleranceMmPerSqrtKm,
    notes: d.notes, benchmarkCount,
  };
}

export function toBenchmarkDto(b: BenchmarkRow): Benchmark {
  // Standard uncertainty of C carried into metres with the mean normal gravity of the point (γ̄ ≈ 9.81, so ~1:1 in mm).
  const gBar = meanNormalGravity(b.latitudeDeg, b.knownNormalHeightM ?? 0);
  let crs: { kind: Benchmark['crsKind']; label: string | null } = { kind: null, label: null };
  try {
    const e = resolveCrs(b.crs);
    crs = { kind: e.kind, label: e.label };
  } catch { /* a CRS string that stopped resolving still shows as entered */ }
  return {
    id: b.id, code: b.code, name: b.name, datumId: b.datumId, datumName: b.datum?.name ?? '',
    crs: b.crs, crsKind: crs.kind, crsLabel: crs.label, coordinates: b.coordinatesEntered, latitudeDeg: b.latitudeDeg, longitudeDeg: b.longitudeDeg,
    ellipsoidalHeightM: b.ellipsoidalHeightM, knownEnteredAs: b.knownEnteredAs, knownC_m2s2: b.knownC_m2s2,
    knownNormalHeightM: b.knownNormalHeightM, knownUncertaintyC_m2s2: b.knownUncertaintyC_m2s2, knownTideSystem: b.knownTideSystem ?? null,
    knownUncertaintyM: b.knownUncertaintyC_m2s2 === null ? null : b.knownUncertaintyC_m2s2 / gBar,
    fixed: b.fixed, monumentation: b.monumentation, state: b.state,
  };
}

/** Forward/backward check: the return run is measured to → from, so forward + backward should vanish. */
export function runCheck(forwardM: number | null | undefined, backwardM: number | null | undefined, lengthKm: number, kMmPerSqrtKm: number) {
  if (forwardM == null || backwardM == null) return { runDifferenceMm: null, runToleranceMm: null, runCheckPassed: null };
  const runDifferenceMm = (forwardM + backwardM) * 1000;
  const runToleranceMm = kMmPerSqrtKm * Math.sqrt(lengthKm);
  return { runDifferenceMm, runToleranceMm, runCheckPassed: Math.abs(runDifferenceMm) <= runToleranceMm };
}

export function toSectionDto(s: LevellingSectionRow, datum?: HeightDatumRow): Section {
  const k = datum?.sectionToleranceMmPerSqrtKm ?? 4;
  return {
    id: s.id, lineName: s.lineName, fromCode: s.fromBenchmark?.code ?? '', toCode: s.toBenchmark?.code ?? '',
    datumName: datum?.name ?? s.fromBenchmark?.datum?.name ?? '',
    deltaHeightM: s.deltaHeightM, lengthKm: s.lengthKm, meanGravity_ms2: s.meanGravity_ms2, gravityFromNormal: s.gravityFromNormal,
    deltaC_m2s2: s.meanGravity_ms2 * s.deltaHeightM,
    observedOn: s.observedOn, forwardM: s.forwardM, backwardM: s.backwardM,
    ...runCheck(s.forwardM, s.backwardM, s.lengthKm, k),
  };
}

/** Normal gravity at the mid-point of a section when no measured surface gravity is known. */
export function normalGravityForSection(from: BenchmarkRow, to: BenchmarkRow): number {
  const midLat = (from.latitudeDeg + to.latitudeDeg) / 2;
  const heights = [from.knownNormalHeightM, to.knownNormalHeightM].filter((h): h is number => h !== null);
  const midHeight = heights.length ? heights.reduce((a, b) => a + b, 0) / heights.length : (from.ellipsoidalHeightM + to.ellipsoidalHeightM) / 2;
  return normalGravityAtHeight(midLat, midHeight);
}

// Sort names come from the lists' zod enums; Maps so no inherited name (`__proto__`, `constructor`) can match.
const benchmarkSort = new Map<BenchmarkSortField, string>([
  ['code', 'b.code'], ['name', 'b.name'], ['datumName', 'd.name'], ['latitudeDeg', 'b.latitude_deg'], ['longitudeDeg', 'b.longitude_deg'],
  ['knownNormalHeightM', 'b.known_normal_height_m'], ['fixed', 'b.fixed'], ['state', 'b.state'],
]);
const sectionSort = new Map<SectionSortField, string>([
  ['lineName', 's.line_name'], ['fromCode', 'f.code'], ['toCode', 't.code'], ['deltaHeightM', 's.delta_height_m'], ['lengthKm', 's.length_km'],
  ['observedOn', 's.observed_on'], ['meanGravity_ms2', 's.mean_gravity_ms2'],
]);

function scienceIssue(e: unknown, prefix: string): never {
  if (e instanceof ScienceInputError) throw new Invalid(e.message, [{ path: `${prefix}.${e.field}`, message: e.message }]);
  throw e;
}

export async function loadSectionsWithBenchmarks(m: EntityManager, datumId?: string) {
  const qb = m.getRepository(LevellingSectionEntity).createQueryBuilder('s')
    .innerJoinAndSelect('s.fromBenchmark', 'f').innerJoinAndSelect('s.toBenchmark', 't').innerJoinAndSelect('f.datum', 'd')
    .orderBy('s.created_at', 'ASC').addOrderBy('f.code', 'ASC').addOrderBy('t.code', 'ASC').addOrderBy('s.id', 'ASC');
  if (datumId) qb.where('f.datum_id = :datumId', { datumId });
  return qb.getMany();
}

export function createNetworkService(dataSource: DataSource) {
  async function findDatum(m: EntityManager, id: string) {
    const d = await m.getRepository(HeightDatumEntity).findOneBy({ id });
    if (!d) throw new NotFound('Height datum');
    return d;
  }

  function benchmarkValues(input: BenchmarkInput) {
    let pos;
    try {
      pos = toGrs80Geodetic(input.crs, input.coordinates);
    } catch (e) {
      scienceIssue(e, 'body');
    }
    let knownC: number | null = null;
    let knownH: number | null = null;
    let uC: number | null = null;
    if (input.known) {
      const gBar = meanNormalGravity(pos.latitudeDeg, input.known.kind === 'H' ? input.known.value : input.known.value / 9.81);
      if (input.known.kind === 'C') {
        knownC = input.known.value;
        knownH = normalHeightFromC(knownC, pos.latitudeDeg);
        uC = input.known.uncertainty;
      } else {
        knownH = input.known.value;
        knownC = cFromNormalHeight(knownH, pos.latitudeDeg);
        uC = input.known.uncertainty * gBar;
      }
    }
    return {
      code: input.code, name: input.name, datumId: input.datumId, crs: input.crs, coordinatesEntered: input.coordinates,
      latitudeDeg: pos.latitudeDeg, longitudeDeg: pos.longitudeDeg, ellipsoidalHeightM: pos.ellipsoidalHeightM,
      knownEnteredAs: input.known?.kind ?? null, knownC_m2s2: knownC, knownNormalHeightM: knownH, knownUncertaintyC_m2s2: uC,
      knownTideSystem: input.known?.tideSystem ?? null,
      fixed: input.fixed, monumentation: input.monumentation ?? null, state: input.state,
    };
  }

  async function sectionValues(m: EntityManager, input: SectionInput, prefix: string, line?: number) {
    const at = (column: string): Partial<FieldIssue> => (line === undefined ? {} : { line, column });
    const repo = m.getRepository(BenchmarkEntity);
    const from = await repo.findOne({ where: { code: input.fromCode }, relations: { datum: true } });
    if (!from) throw new Invalid(`${line ? `Line ${line}, column from: ` : ''}unknown benchmark ${input.fromCode}.${line ? ' Nothing was stored.' : ''}`, [{ path: `${prefix}.fromCode`, message: `no benchmark with code ${input.fromCode}`, ...at('from') }]);
    const to = await repo.findOne({ where: { code: input.toCode }, relations: { datum: true } });
    if (!to) throw new Invalid(`${line ? `Line ${line}, column to: ` : ''}unknown benchmark ${input.toCode}.${line ? ' Nothing was stored.' : ''}`, [{ path: `${prefix}.toCode`, message: `no benchmark with code ${input.toCode}`, ...at('to') }]);
    if (from.id === to.id) throw new Invalid('A section must join two different benchmarks.', [{ path: `${prefix}.toCode`, message: 'same as from', ...at('to') }]);
    const gravityFromNormal = input.meanGravity_ms2 == null;
    return {
      from, to,
      values: {
        lineName: input.lineName ?? null, fromBenchmarkId: from.id, toBenchmarkId: to.id, deltaHeightM: input.deltaHeightM,
        lengthKm: input.lengthKm, meanGravity_ms2: input.meanGravity_ms2 ?? normalGravityForSection(from, to), gravityFromNormal,
        observedOn: input.observedOn ?? null, forwardM: input.forwardM ?? null, backwardM: input.backwardM ?? null,
      },
    };
  }

  return {
    // ---- datums ----
    async listDatums(actor: Actor): Promise<HeightDatum[]> {
      authorize(actor, 'network:read');
      const rows = await dataSource.getRepository(HeightDatumEntity).find({ order: { name: 'ASC' } });
      const counts: { datum_id: string; n: string }[] = await dataSource.query('SELECT datum_id, count(*) AS n FROM benchmark GROUP BY datum_id');
      const byId = new Map(counts.map((c) => [c.datum_id, Number(c.n)]));
      return rows.map((d) => toDatumDto(d, byId.get(d.id) ?? 0));
    },
    async createDatum(actor: Actor, input: HeightDatumInput): Promise<HeightDatum> {
      authorize(actor, 'network:write');
      return dataSource.transaction(async (m) => {
        if (await m.getRepository(HeightDatumEntity).findOneBy({ name: input.name })) throw new Conflict(`A height datum named ${input.name} exists.`);
        const row = await m.getRepository(HeightDatumEntity).save({
          name: input.name, tideSystem: input.tideSystem, realisationEpoch: input.realisationEpoch ?? null,
          loopToleranceMmPerSqrtKm: input.loopToleranceMmPerSqrtKm, sectionToleranceMmPerSqrtKm: input.sectionToleranceMmPerSqrtKm,
          notes: input.notes ?? null,
        });
        await recordAudit(m, actor, { action: 'height-datum.created', entityType: 'height-datum', entityId: row.id, details: { name: row.name, tideSystem: row.tideSystem } });
        return toDatumDto(row);
      });
    },
    async updateDatum(actor: Actor, id: string, input: HeightDatumInput): Promise<HeightDatum> {
      authorize(actor, 'network:write');
      return dataSource.transaction(async (m) => {
        const d = await findDatum(m, id);
        const clash = await m.getRepository(HeightDatumEntity).findOneBy({ name: input.name });
        if (clash && clash.id !== id) throw new Conflict(`A height datum named ${input.name} exists.`);
        Object.assign(d, {
          name: input.name, tideSystem: input.tideSystem, realisationEpoch: input.realisationEpoch ?? null,
          loopToleranceMmPerSqrtKm: input.loopToleranceMmPerSqrtKm, sectionToleranceMmPerSqrtKm: input.sectionToleranceMmPerSqrtKm, notes: input.notes ?? null,
        });
        const row = await m.getRepository(HeightDatumEntity).save(d);
        await recordAudit(m, actor, { action: 'height-datum.updated', entityType: 'height-datum', entityId: id, details: { ...input } });
        return toDatumDto(row, await m.getRepository(BenchmarkEntity).countBy({ datumId: id }));
      });
    },

    // ---- benchmarks ----
    async listBenchmarks(actor: Actor, q: PageQuery & { datumId?: string; sort?: BenchmarkSortField }) {
      authorize(actor, 'network:read');
      const qb = dataSource.getRepository(BenchmarkEntity).createQueryBuilder('b').innerJoinAndSelect('b.datum', 'd');
      if (q.datumId) qb.andWhere('b.datum_id = :datumId', { datumId: q.datumId });
      if (q.q) qb.andWhere('(b.code ILIKE :q OR b.name ILIKE :q OR d.name ILIKE :q)', { q: `%${q.q}%` });
      qb.orderBy(benchmarkSort.get(q.sort ?? 'code') ?? 'b.code', q.order === 'desc' ? 'DESC' : 'ASC').addOrderBy('b.id', 'ASC');
      const [rows, total] = await qb.skip((q.page - 1) * q.pageSize).take(q.pageSize).getManyAndCount();
      return { items: rows.map(toBenchmarkDto), total, page: q.page, pageSize: q.pageSize };
    },
    async getBenchmark(actor: Actor, id: string): Promise<Benchmark> {
      authorize(actor, 'network:read');
      const b = await dataSource.getRepository(BenchmarkEntity).findOne({ where: { id }, relations: { datum: true } });
      if (!b) throw new NotFound('Benchmark');
      return toBenchmarkDto(b);
    },
    async createBenchmark(actor: Actor, input: BenchmarkInput): Promise<Benchmark> {
      authorize(actor, 'network:write');
      const values = benchmarkValues(input);
      return dataSource.transaction(async (m) => {
        const datum = await m.getRepository(HeightDatumEntity).findOneBy({ id: input.datumId });
        if (!datum) throw new Invalid('Unknown height datum.', [{ path: 'body.datumId', message: 'no such height datum' }]);
        if (await m.getRepository(BenchmarkEntity).findOneBy({ code: input.code })) throw new Conflict(`Benchmark ${input.code} exists.`);
        const row = await m.getRepository(BenchmarkEntity).save(values);
        await recordAudit(m, actor, { action: 'benchmark.created', entityType: 'benchmark', entityId: row.id, details: { code: row.code, fixed: row.fixed } });
        return toBenchmarkDto({ ...row, datum });
      });
    },
    async updateBenchmark(actor: Actor, id: string, input: BenchmarkInput): Promise<Benchmark> {
      authorize(actor, 'network:write');
      const values = benchmarkValues(input);
      return dataSource.transaction(async (m) => {
        const repo = m.getRepository(BenchmarkEntity);
        const b = await repo.findOneBy({ id });
        if (!b) throw new NotFound('Benchmark');
        const datum = await m.getRepository(HeightDatumEntity).findOneBy({ id: input.datumId });
        if (!datum) throw new Invalid('Unknown height datum.', [{ path: 'body.datumId', message: 'no such height datum' }]);
        const clash = await repo.findOneBy({ code: input.code });
        if (clash && clash.id !== id) throw new Conflict(`Benchmark ${input.code} exists.`);
        const row = await repo.save({ ...b, ...values });
        await recordAudit(m, actor, { action: 'benchmark.updated', entityType: 'benchmark', entityId: id, details: { code: row.code, fixed: row.fixed, state: row.state } });
        return toBenchmarkDto({ ...row, datum });
      });
    },

    // ---- sections ----
    async listSections(actor: Actor, q: PageQuery & { datumId?: string; sort?: SectionSortField }) {
      authorize(actor, 'network:read');
      const qb = dataSource.getRepository(LevellingSectionEntity).createQueryBuilder('s')
        .innerJoinAndSelect('s.fromBenchmark', 'f').innerJoinAndSelect('s.toBenchmark', 't').innerJoinAndSelect('f.datum', 'd');
      if (q.datumId) qb.andWhere('f.datum_id = :datumId', { datumId: q.datumId });
      if (q.q) qb.andWhere('(s.line_name ILIKE :q OR f.code ILIKE :q OR t.code ILIKE :q)', { q: `%${q.q}%` });
      qb.orderBy(sectionSort.get(q.sort ?? 'lineName') ?? 's.line_name', q.order === 'desc' ? 'DESC' : 'ASC').addOrderBy('s.created_at', 'ASC').addOrderBy('s.id', 'ASC');
      const [rows, total] = await qb.skip((q.page - 1) * q.pageSize).take(q.pageSize).getManyAndCount();
      return { items: rows.map((s) => toSectionDto(s, s.fromBenchmark?.datum)), total, page: q.page, pageSize: q.pageSize };
    },
    async createSection(actor: Actor, input: SectionInput): Promise<Section> {
      authorize(actor, 'network:write');
      return dataSource.transaction(async (m) => {
        const { from, to, values } = await sectionValues(m, input, 'body');
        const row = await m.getRepository(LevellingSectionEntity).save(values);
        await recordAudit(m, actor, { action: 'levelling-section.created', entityType: 'levelling-section', entityId: row.id, details: { from: from.code, to: to.code } });
        return toSectionDto({ ...row, fromBenchmark: from, toBenchmark: to }, from.datum);
      });
    },
    async updateSection(actor: Actor, id: string, input: SectionInput): Promise<Section> {
      authorize(actor, 'network:write');
      return dataSource.transaction(async (m) => {
        const repo = m.getRepository(LevellingSectionEntity);
        const s = await repo.findOneBy({ id });
        if (!s) throw new NotFound('Levelling section');
        const { from, to, values } = await sectionValues(m, input, 'body');
        const row = await repo.save({ ...s, ...values });
        await recordAudit(m, actor, { action: 'levelling-section.updated', entityType: 'levelling-section', entityId: id, details: { from: from.code, to: to.code, deltaHeightM: input.deltaHeightM } });
        return toSectionDto({ ...row, fromBenchmark: from, toBenchmark: to }, from.datum);
      });
    },
    async deleteSection(actor: Actor, id: string): Promise<void> {
      authorize(actor, 'network:write');
      await dataSource.transaction(async (m) => {
        const s = await m.getRepository(LevellingSectionEntity).findOneBy({ id });
        if (!s) throw new NotFound('Levelling section');
        await m.getRepository(LevellingSectionEntity).delete({ id });
        await recordAudit(m, actor, { action: 'levelling-section.deleted', entityType: 'levelling-section', entityId: id, details: { deltaHeightM: s.deltaHeightM, lengthKm: s.lengthKm } });
      });
    },
    /** Stores already-validated upload rows in the caller's transaction (all or nothing). */
    async insertSectionRows(m: EntityManager, rows: { input: SectionInput; line: number }[], sha256: string) {
      const stored: LevellingSectionRow[] = [];
      for (const r of rows) {
        const { values } = await sectionValues(m, r.input, `file.line ${r.line}`, r.line);
        stored.push(await m.getRepository(LevellingSectionEntity).save({ ...values, uploadSha256: sha256 }));
      }
      return stored;
    },
    sectionValues,

    // ---- loops ----
    async loops(actor: Actor, datumId?: string): Promise<LoopReport> {
      authorize(actor, 'network:read');
      const datum = datumId ? await findDatum(dataSource.manager, datumId) : null;
      const sections = await loadSectionsWithBenchmarks(dataSource.manager, datumId);
      const k = datum?.loopToleranceMmPerSqrtKm ?? 4;
      const meanG = sections.length ? sections.reduce((a, s) => a + s.meanGravity_ms2, 0) / sections.length : 9.81;
      const report = loopMisclosures(
        sections.map((s) => ({ id: s.id, from: s.fromBenchmark!.code, to: s.toBenchmark!.code, deltaC: s.meanGravity_ms2 * s.deltaHeightM, lengthKm: s.lengthKm })),
        { toleranceMmPerSqrtKm: k, meanGravity_ms2: meanG },
      );
      const loops = report.loops.map((l) => ({
        misclosure_m2s2: l.misclosure_m2s2, misclosureMm: l.misclosureMm, lengthKm: l.lengthKm, toleranceMm: l.toleranceMm, passed: l.passed,
        sections: Array.from(l.sections).map((idx, j) => {
          const s = sections[idx];
          return { id: s.id, fromCode: s.fromBenchmark!.code, toCode: s.toBenchmark!.code, lineName: s.lineName, reversed: l.orientation[j] < 0 };
        }),
      }));
      // Failing loops first, worst first: that is where the coordinator has to look.
      loops.sort((a, b) => Number(a.passed) - Number(b.passed) || Math.abs(b.misclosureMm) / b.toleranceMm - Math.abs(a.misclosureMm) / a.toleranceMm);
      return {
        toleranceMmPerSqrtKm: k,
        toleranceSource: datum
          ? `tolerance coefficient t = ${k} mm/√km set on ${datum.name}`
          : 'tolerance coefficient t = 4 mm/√km: FGCC 1984 §3.5 first-order levelling (value from memory); choose a datum to use its own t',
        meanGravity_ms2: meanG, independentLoops: report.independentLoops, failing: loops.filter((l) => !l.passed).length, loops,
      };
    },
  };
}
