import type { DataSource, EntityManager } from 'typeorm';
import type { Chain, ChainCandidates, ChainListQuery, ChainResult, CreateChain, UpdateChain } from '../../shared/chains';
import type { Page } from '../../shared/http';
import { recordAudit } from '../audit/audit.service';
import type { Actor } from '../auth/actor';
import { canSeeCampaign } from '../auth/campaign-scope';
import { authorize, requireSameInstitute } from '../auth/permissions';
import { InstituteEntity } from '../db/entities/core.entities';
import { CalibrationChainEntity, CampaignEntity, ClockEntity, type CalibrationChainRow, type CampaignRow } from '../db/entities/registry.entities';
import { csvLine } from '../http/csv';
import { AppError, Conflict, Invalid, NotFound } from '../http/errors';
import { ScienceInputError } from '../science/errors';
import { campaignOwnership, canSeeChain, chainAccepted, ChainNotReady, computeChain, loadChainCampaigns, type ChainCampaigns } from './chain-compute';

// Calibration chains: who may see, create, change and delete them, and their result and exports.
// Visibility: a chain is visible only to someone who may see every campaign it uses (server/auth/campaign-scope.ts).
// Writing: the coordinator, and the operators of the transportable clock's institute.

export class ChainResultNotReady extends AppError {
  constructor(message: string, missing: { campaignId: string; name: string }[]) {
    super(404, 'chain-result-not-ready', 'Chain result not available', message, { missing });
  }
}

const ownership = campaignOwnership;

async function toDto(m: EntityManager, row: CalibrationChainRow, cs: ChainCampaigns): Promise<Chain> {
  const clocks = new Map((await m.getRepository(ClockEntity).find({ where: [{ id: row.transportableClockId }, { id: row.referenceClockId }], relations: { institute: true } })).map((c) => [c.id, c]));
  const inst = await m.getRepository(InstituteEntity).findOne({ where: { id: row.instituteId } });
  const clockRef = (id: string) => {
    const c = clocks.get(id);
    return { id, name: c?.name ?? id, instituteCode: c?.institute?.code ?? '' };
  };
  const ref = (c: CampaignRow | null) => c && ({
    id: c.id, name: c.name, role: c.role, state: c.state, periodStart: c.periodStart.toISOString(), periodEnd: c.periodEnd.toISOString(), siteAId: c.siteAId, siteBId: c.siteBId,
  });
  return {
    id: row.id, name: row.name, instituteId: row.instituteId, instituteCode: inst?.code ?? '',
    transportableClock: clockRef(row.transportableClockId), referenceClock: clockRef(row.referenceClockId),
    remoteCampaign: ref(cs.remote)!, beforeCampaign: ref(cs.before), afterCampaign: ref(cs.after),
    transportReproducibility: row.transportReproducibility, transportReproducibilitySource: row.transportReproducibilitySource, notes: row.notes,
    state: chainAccepted(cs) ? 'accepted' : 'pending', createdBy: row.createdBy, createdAt: row.createdAt.toISOString(), updatedAt: row.updatedAt.toISOString(),
  };
}

type Fields = Omit<CreateChain, 'notes'> & { notes: string };

/** The rules of a chain, each refusal naming its field; nothing is stored unless all hold. */
async function validate(m: EntityManager, actor: Actor, f: Fields, selfId: string | null): Promise<ChainCampaigns> {
  const issues: { path: string; message: string }[] = [];
  const fail = (path: string, message: string) => issues.push({ path: `body.${path}`, message });
  const T = await m.getRepository(ClockEntity).findOne({ where: { id: f.transportableClockId } });
  const R = await m.getRepository(ClockEntity).findOne({ where: { id: f.referenceClockId } });
  if (!T) fail('transportableClockId', 'no such clock');
  else if (T.mobility !== 'transportable') fail('transportableClockId', `${T.name} is registered as stationary; a chain needs a transportable clock`);
  if (!R) fail('referenceClockId', 'no such clock');
  if (T && R && T.id === R.id) fail('referenceClockId', 'the reference clock must be another clock than the transportable one');
  if (issues.length) throw new Invalid('The chain is not valid: ' + issues.map((i) => `${i.path.slice(5)}: ${i.message}`).join('; '), issues);
  requireSameInstitute(actor, T!.instituteId);
  const load = async (id: string | null) => (id ? m.getRepository(CampaignEntity).findOne({ where: { id }, relations: { clockB: true } }) : null);
  const remote = await load(f.remoteCampaignId);
  const before = await load(f.beforeCampaignId);
  const after = await load(f.afterCampaignId);
  const has = (c: CampaignRow, id: string) => c.clockAId === id || c.clockBId === id;
  // A campaign the caller may not see is answered as missing, like everywhere else.
  const visible = (c: CampaignRow | null) => c && canSeeCampaign(actor, ownership(c));
  if (!visible(remote)) fail('remoteCampaignId', 'no such campaign');
  else {
    if (remote!.role !== 'remote') fail('remoteCampaignId', `${remote!.name} is a side-by-side campaign; the remote campaign must be one of the role remote`);
    if (!has(remote!, T!.id)) fail('remoteCampaignId', `${remote!.name} does not compare ${T!.name}`);
  }
  if (!f.beforeCampaignId && !f.afterCampaignId) fail('beforeCampaignId', 'give a side-by-side calibration before or after the remote campaign (or both)');
  if (f.beforeCampaignId && f.beforeCampaignId === f.afterCampaignId) fail('afterCampaignId', 'the before and after calibrations must be two campaigns');
  for (const [field, c, id] of [['beforeCampaignId', before, f.beforeCampaignId], ['afterCampaignId', after, f.afterCampaignId]] as const) {
    if (!id) continue;
    if (!visible(c)) { fail(field, 'no such campaign'); continue; }
    if (c!.role !== 'side-by-side') fail(field, `${c!.name} is a remote campaign; calibrations must be side-by-side campaigns`);
    if (!has(c!, T!.id) || !has(c!, R!.id)) fail(field, `${c!.name} does not compare ${T!.name} with the reference clock ${R!.name}`);
    if (remote && field === 'beforeCampaignId' && c!.periodEnd > remote.periodStart) fail(field, `${c!.name} ends after the remote campaign starts; a before calibration must come first`);
    if (remote && field === 'afterCampaignId' && c!.periodStart < remote.periodEnd) fail(field, `${c!.name} starts before the remote campaign ends; an after calibration must come afterwards`);
  }
  if (!(f.beforeCampaignId && f.afterCampaignId) && f.transportReproducibility === null) {
    fail('transportReproducibility', 'with one calibration, enter the transport reproducibility (fractional standard uncertainty) and its source');
  }
  if (f.transportReproducibility !== null && !f.transportReproducibilitySource) fail('transportReproducibilitySource', 'say where the transport reproducibility comes from');
  if (issues.length) throw new Invalid('The chain is not valid: ' + issues.map((i) => `${i.path.slice(5)}: ${i.message}`).join('; '), issues);
  // One chain per remote campaign: the campaign enters the network adjustment through its chain once.
  const other = await m.getRepository(CalibrationChainEntity).findOne({ where: { remoteCampaignId: remote!.id } });
  if (other && other.id !== selfId) throw new Conflict(`${remote!.name} is already the remote campaign of the chain “${other.name}”; a campaign enters the adjustment through one chain only.`, { chainId: other.id });
  return { remote: remote!, before, after };
}

export function createChainsService(dataSource: DataSource) {
  async function readable(m: EntityManager, actor: Actor, id: string) {
    const row = await m.getRepository(CalibrationChainEntity).findOne({ where: { id } });
    if (!row) throw new NotFound('Chain');
    const cs = await loadChainCampaigns(m, row);
    if (!canSeeChain(actor, cs)) throw new NotFound('Chain');
    return { row, cs };
  }
  async function writable(m: EntityManager, actor: Actor, id: string) {
    const r = await readable(m, actor, id);
    const T = await m.getRepository(ClockEntity).findOne({ where: { id: r.row.transportableClockId } });
    requireSameInstitute(actor, T?.instituteId ?? null);
    return r;
  }

  const service = {
    async candidates(actor: Actor): Promise<ChainCandidates> {
      authorize(actor, 'campaigns:read');
      const m = dataSource.manager;
      const clocks = await m.getRepository(ClockEntity).find({ where: { mobility: 'transportable' }, relations: { institute: true }, order: { name: 'ASC' } });
      const ids = clocks.map((c) => c.id);
      if (ids.length === 0) return { clocks: [], campaigns: [] };
      const rows = await m.getRepository(CampaignEntity).find({ where: [...ids.map((id) => ({ clockAId: id })), ...ids.map((id) => ({ clockBId: id }))], relations: { clockA: true, clockB: true }, order: { periodStart: 'ASC' } });
      return {
        clocks: clocks.map((c) => ({ id: c.id, name: c.name, instituteCode: c.institute?.code ?? '', mobility: c.mobility })),
        campaigns: rows.filter((c) => canSeeCampaign(actor, ownership(c))).map((c) => ({
          id: c.id, name: c.name, role: c.role, state: c.state, clockAId: c.clockAId, clockBId: c.clockBId, clockAName: c.clockA?.name ?? '', clockBName: c.clockB?.name ?? '', periodStart: c.periodStart.toISOString(), periodEnd: c.periodEnd.toISOString(),
        })),
      };
    },

    async list(actor: Actor, q: ChainListQuery): Promise<Page<Chain>> {
      authorize(actor, 'campaigns:read');
      const m = dataSource.manager;
      const rows = await m.getRepository(CalibrationChainEntity).find({ order: { createdAt: 'ASC', id: 'ASC' } });
      const visible: { row: CalibrationChainRow; cs: ChainCampaigns }[] = [];
      for (const row of rows) {
        if (q.q && !row.name.toLowerCase().includes(q.q.toLowerCase())) continue;
        const cs = await loadChainCampaigns(m, row);
        if (canSeeChain(actor, cs)) visible.push({ row, cs });
      }
      const key = q.sort ?? 'createdAt';
      const dir = q.order === 'desc' ? -1 : 1;
      visible.sort((a, b) => dir * (key === 'name' ? a.row.name.localeCompare(b.row.name) : a.row[key].getTime() - b.row[key].getTime()) || a.row.id.localeCompare(b.row.id));
      const page = visible.slice((q.page - 1) * q.pageSize, q.page * q.pageSize);
      return { items: await Promise.all(page.map((v) => toDto(m, v.row, v.cs))), total: visible.length, page: q.page, pageSize: q.pageSize };
    },

    async get(actor: Actor, id: string): Promise<Chain> {
      authorize(actor, 'campaigns:read');
      const { row, cs } = await readable(dataSource.manager, actor, id);
      return toDto(dataSource.manager, row, cs);
    },

    async result(actor: Actor, id: string): Promise<ChainResult> {
      authorize(actor, 'campaigns:read');
      const { row, cs } = await readable(dataSource.manager, actor, id);
      try {
        return await computeChain(dataSource.manager, row, cs);
      } catch (e) {
        if (e instanceof ChainNotReady) throw new ChainResultNotReady(e.message, e.missing);
        if (e instanceof ScienceInputError) throw new Invalid(`The chain cannot be computed: ${e.message}`, [{ path: e.field, message: e.message }]);
        throw e;
      }
    },

    async create(actor: Actor, body: CreateChain): Promise<Chain> {
      authorize(actor, 'chains:write');
      return dataSource.transaction(async (m) => {
        const cs = await validate(m, actor, body, null);
        const T = (await m.getRepository(ClockEntity).findOne({ where: { id: body.transportableClockId } }))!;
        const saved = await m.getRepository(CalibrationChainEntity).save({
          ...body, instituteId: T.instituteId, createdByUserId: actor.userId ?? null, createdBy: actor.email ?? actor.role,
        });
        await recordAudit(m, actor, { action: 'chain.create', entityType: 'calibration_chain', entityId: saved.id, instituteId: T.instituteId, details: { name: body.name, remoteCampaignId: body.remoteCampaignId, beforeCampaignId: body.beforeCampaignId, afterCampaignId: body.afterCampaignId } });
        return toDto(m, (await m.getRepository(CalibrationChainEntity).findOneBy({ id: saved.id }))!, cs);
      });
    },

    async update(actor: Actor, id: string, body: UpdateChain): Promise<Chain> {
      authorize(actor, 'chains:write');
      return dataSource.transaction(async (m) => {
        const { row } = await writable(m, actor, id);
        const merged: Fields = {
          name: body.name ?? row.name, transportableClockId: body.transportableClockId ?? row.transportableClockId, referenceClockId: body.referenceClockId ?? row.referenceClockId,
          remoteCampaignId: body.remoteCampaignId ?? row.remoteCampaignId,
          beforeCampaignId: body.beforeCampaignId !== undefined ? body.beforeCampaignId : row.beforeCampaignId,
          afterCampaignId: body.afterCampaignId !== undefined ? body.afterCampaignId : row.afterCampaignId,
          transportReproducibility: body.transportReproducibility !== undefined ? body.transportReproducibility : row.transportReproducibility,
          transportReproducibilitySource: body.transportReproducibilitySource !== undefined ? body.transportReproducibilitySource : row.transportReproducibilitySource,
          notes: body.notes ?? row.notes,
        };
        const cs = await validate(m, actor, merged, id);
        await m.getRepository(CalibrationChainEntity).update({ id }, { ...merged, updatedAt: new Date() });
        await recordAudit(m, actor, { action: 'chain.update', entityType: 'calibration_chain', entityId: id, instituteId: row.instituteId, details: { changed: Object.keys(body) } });
        return toDto(m, (await m.getRepository(CalibrationChainEntity).findOneBy({ id }))!, cs);
      });
    },

    async remove(actor: Actor, id: string): Promise<void> {
      authorize(actor, 'chains:write');
      await dataSource.transaction(async (m) => {
        const { row } = await writable(m, actor, id);
        // Certificates are never deleted, and each names its chain: a certified chain stays.
        const [cert]: { number: string }[] = await m.query("SELECT number FROM certificate WHERE chain_id = $1 ORDER BY (state = 'valid') DESC, issued_at DESC LIMIT 1", [id]);
        const [req]: { id: string }[] = cert ? [] : await m.query('SELECT id FROM certificate_request WHERE chain_id = $1 LIMIT 1', [id]);
        if (cert || req) throw new Conflict(cert ? `The chain has certificate ${cert.number}; a certified chain cannot be deleted (withdraw the certificate if it must no longer be relied on).` : 'A certificate was asked for this chain; it cannot be deleted.', cert ? { number: cert.number } : {});
        await m.getRepository(CalibrationChainEntity).delete({ id });
        await recordAudit(m, actor, { action: 'chain.delete', entityType: 'calibration_chain', entityId: id, instituteId: row.instituteId, details: { name: row.name } });
      });
    },

    async csv(actor: Actor, id: string): Promise<string> {
      const r = await service.result(actor, id);
      const out = [csvLine(['section', 'quantity', 'value', 'standard_uncertainty', 'expanded_uncertainty', 'unit', 'note'])];
      const cov = `k = ${r.deltaC_m2s2.coverageFactor.toFixed(3)}, p = ${(100 * r.deltaC_m2s2.coverageProbability).toFixed(2)} %, nu_eff = ${r.deltaC_m2s2.effectiveDegreesOfFreedom?.toFixed(1) ?? 'infinite'}`;
      out.push(csvLine(['result', 'delta_C', r.deltaC_m2s2.value, r.deltaC_m2s2.standardUncertainty, r.deltaC_m2s2.expandedUncertainty, 'm2/s2', `${r.fromSite.name} to ${r.toSite.name}; ${cov}`]));
      out.push(csvLine(['result', 'delta_H', r.deltaH_m.value, r.deltaH_m.standardUncertainty, r.deltaH_m.expandedUncertainty, 'm', cov]));
      out.push(csvLine(['result', 'y_remote', r.yRemote, null, null, '1', 'T relative to its partner']));
      out.push(csvLine(['result', 'y_side_by_side', r.ySideBySide, null, null, '1', 'weighted calibrated offset']));
      for (const c of r.calibrations) out.push(csvLine(['calibration', `offset_${c.which}`, c.offset, c.unsharedUncertainty, null, '1', `weight ${c.weight}`]));
      out.push(csvLine(['transport', 'reproducibility', null, r.transport.standardUncertainty, null, '1', r.transport.source]));
      if (r.beforeAfter) out.push(csvLine(['before_after', 'difference', r.beforeAfter.difference, r.beforeAfter.standardUncertainty, r.beforeAfter.expandedUncertainty, '1', `E_n = ${r.beforeAfter.en}`]));
      for (const l of r.lines) out.push(csvLine(['budget', l.label, l.sensitivity_m2s2, l.standardUncertainty, null, l.unit, `contribution ${l.contribution_m2s2} m2/s2${l.cancels ? '; cancels' : ''}`]));
      out.push(csvLine(['caution', 'verify', null, null, null, null, 'verify against your national datum authority and your lab’s quality procedures']));
      return out.join('\r\n') + '\r\n';
    },
  };
  return service;
}
