import type { DataSource, EntityManager } from 'typeorm';
import { createDeploymentSchema, deploymentsOverlap, updateDeploymentSchema, type CreateDeployment, type UpdateDeployment } from '../../shared/deployments';
import { recordAudit } from '../audit/audit.service';
import type { Actor } from '../auth/actor';
import { authorize, can, requireSameInstitute } from '../auth/permissions';
import { ClockBudgetVersionEntity, ClockDeploymentEntity, ClockEntity, SiteEntity, type ClockDeploymentRow, type ClockRow } from '../db/entities/registry.entities';
import { Conflict, Invalid, NotFound } from '../http/errors';

// Deployments of transportable clocks (docs/decisions/0007-deployments.md): every signed-in role reads them; lab staff
// of the clock's institute and the coordinating institute write them. A clock's deployments never overlap (checked
// under a lock on the clock row, so two writers cannot both pass the check). A stationary clock has none.

export function createDeploymentsService(dataSource: DataSource) {
  async function lockClock(m: EntityManager, clockId: string): Promise<ClockRow> {
    const c = await m.getRepository(ClockEntity).createQueryBuilder('c').setLock('pessimistic_write').where('c.id = :id', { id: clockId }).getOne();
    if (!c) throw new NotFound('Clock');
    return c;
  }
  async function dto(m: EntityManager, d: ClockDeploymentRow, clock: Pick<ClockRow, 'id' | 'name'>) {
    const site = d.site ?? (await m.getRepository(SiteEntity).findOne({ where: { id: d.siteId }, relations: { institute: true } }));
    const versions = await m.getRepository(ClockBudgetVersionEntity).find({ where: { deploymentId: d.id }, select: { version: true }, order: { version: 'ASC' } });
    return {
      id: d.id,
      clock: { id: clock.id, name: clock.name },
      site: { id: d.siteId, name: site?.name ?? '', instituteCode: site?.institute?.code ?? '' },
      arrivedAt: d.arrivedAt.toISOString(),
      departedAt: d.departedAt ? d.departedAt.toISOString() : null,
      note: d.note,
      budgetVersions: versions.map((v) => v.version),
      createdBy: d.createdBy,
      createdAt: d.createdAt.toISOString(),
    };
  }
  async function checkSite(m: EntityManager, siteId: string) {
    if (!(await m.getRepository(SiteEntity).existsBy({ id: siteId }))) throw new Invalid('Unknown site.', [{ path: 'body.siteId', message: 'no such site' }]);
  }
  async function refuseOverlap(m: EntityManager, clockId: string, span: { arrivedAt: Date; departedAt: Date | null }, exceptId: string | null) {
    const others = await m.getRepository(ClockDeploymentEntity).find({ where: { clockId }, relations: { site: true }, order: { arrivedAt: 'ASC' } });
    const clash = others.find((o) => o.id !== exceptId && deploymentsOverlap({ siteId: o.siteId, ...span }, o));
    if (clash) {
      const until = clash.departedAt ? clash.departedAt.toISOString() : 'still there';
      throw new Invalid(`This deployment overlaps the one at ${clash.site?.name ?? 'another site'} (${clash.arrivedAt.toISOString()} – ${until}); a clock stands at one site at a time.`, [
        { path: 'body.arrivedAt', message: `overlaps deployment ${clash.id}` },
      ]);
    }
  }
  function requireTransportable(c: ClockRow) {
    if (c.mobility !== 'transportable') {
      throw new Invalid(`${c.name} is stationary: it always stands at its registered site. Mark it transportable first.`, [{ path: 'params.id', message: 'the clock is stationary' }]);
    }
  }

  return {
    async list(actor: Actor, clockId: string) {
      authorize(actor, 'registry:read');
      return dataSource.transaction(async (m) => {
        const c = await m.getRepository(ClockEntity).findOne({ where: { id: clockId }, relations: { site: true } });
        if (!c) throw new NotFound('Clock');
        const rows = await m.getRepository(ClockDeploymentEntity).find({ where: { clockId }, relations: { site: { institute: true } }, order: { arrivedAt: 'ASC' } });
        const deployments = [];
        for (const d of rows) deployments.push(await dto(m, d, c));
        const canWrite = can(actor, 'registry:write') && (actor.role !== 'operator' || actor.instituteId === c.instituteId);
        return { clock: { id: c.id, name: c.name, mobility: c.mobility, homeSite: { id: c.siteId, name: c.site?.name ?? '' } }, deployments, canWrite };
      });
    },

    async create(actor: Actor, clockId: string, input: CreateDeployment) {
      authorize(actor, 'registry:write');
      const body = createDeploymentSchema.parse(input);
      return dataSource.transaction(async (m) => {
        const c = await lockClock(m, clockId);
        requireSameInstitute(actor, c.instituteId);
        requireTransportable(c);
        await checkSite(m, body.siteId);
        const span = { arrivedAt: new Date(body.arrivedAt), departedAt: body.departedAt ? new Date(body.departedAt) : null };
        await refuseOverlap(m, clockId, span, null);
        const repo = m.getRepository(ClockDeploymentEntity);
        const saved = await repo.save(repo.create({ clockId, siteId: body.siteId, ...span, note: body.note, createdByUserId: actor.userId, createdBy: actor.displayName }));
        await recordAudit(m, actor, { action: 'clock.deployment-added', entityType: 'clock', entityId: clockId, instituteId: c.instituteId, details: { deploymentId: saved.id, siteId: body.siteId, arrivedAt: body.arrivedAt, departedAt: body.departedAt, note: body.note } });
        return dto(m, await repo.findOneOrFail({ where: { id: saved.id }, relations: { site: { institute: true } } }), c);
      });
    },

    async update(actor: Actor, clockId: string, deploymentId: string, input: UpdateDeployment) {
      authorize(actor, 'registry:write');
      const body = updateDeploymentSchema.parse(input);
      return dataSource.transaction(async (m) => {
        const c = await lockClock(m, clockId);
        requireSameInstitute(actor, c.instituteId);
        const repo = m.getRepository(ClockDeploymentEntity);
        const d = await repo.findOneBy({ id: deploymentId, clockId });
        if (!d) throw new NotFound('Deployment');
        const before = { siteId: d.siteId, arrivedAt: d.arrivedAt.toISOString(), departedAt: d.departedAt?.toISOString() ?? null, note: d.note };
        if (body.siteId !== undefined) {
          await checkSite(m, body.siteId);
          d.siteId = body.siteId;
        }
        if (body.arrivedAt !== undefined) d.arrivedAt = new Date(body.arrivedAt);
        if (body.departedAt !== undefined) d.departedAt = body.departedAt === null ? null : new Date(body.departedAt);
        if (body.note !== undefined) d.note = body.note;
        if (d.departedAt && d.departedAt <= d.arrivedAt) throw new Invalid('The departure must be after the arrival.', [{ path: 'body.departedAt', message: 'must be after the arrival' }]);
        await refuseOverlap(m, clockId, d, d.id);
        await repo.update({ id: d.id }, { siteId: d.siteId, arrivedAt: d.arrivedAt, departedAt: d.departedAt, note: d.note });
        await recordAudit(m, actor, { action: 'clock.deployment-updated', entityType: 'clock', entityId: clockId, instituteId: c.instituteId, details: { deploymentId, before, after: body } });
        return dto(m, await repo.findOneOrFail({ where: { id: d.id }, relations: { site: { institute: true } } }), c);
      });
    },

    async remove(actor: Actor, clockId: string, deploymentId: string) {
      authorize(actor, 'registry:write');
      return dataSource.transaction(async (m) => {
        const c = await lockClock(m, clockId);
        requireSameInstitute(actor, c.instituteId);
        const repo = m.getRepository(ClockDeploymentEntity);
        const d = await repo.findOneBy({ id: deploymentId, clockId });
        if (!d) throw new NotFound('Deployment');
        const tied = await m.getRepository(ClockBudgetVersionEntity).find({ where: { deploymentId }, select: { version: true } });
        if (tied.length) throw new Conflict(`Budget version(s) ${tied.map((t) => `v${t.version}`).join(', ')} of ${c.name} were evaluated for this deployment; it stays on record.`, { budgetVersions: tied.map((t) => t.version) });
        await repo.delete({ id: deploymentId });
        await recordAudit(m, actor, { action: 'clock.deployment-removed', entityType: 'clock', entityId: clockId, instituteId: c.instituteId, details: { deploymentId, siteId: d.siteId, arrivedAt: d.arrivedAt.toISOString(), departedAt: d.departedAt?.toISOString() ?? null } });
        return { deleted: true as const };
      });
    },

    /** Which clocks stood at a site and when: deployments there, then the stationary clocks registered there. */
    async atSite(actor: Actor, siteId: string) {
      authorize(actor, 'registry:read');
      if (!(await dataSource.getRepository(SiteEntity).existsBy({ id: siteId }))) throw new NotFound('Site');
      const deployed = await dataSource.getRepository(ClockDeploymentEntity).createQueryBuilder('d').innerJoin('clock', 'c', 'c.id = d.clock_id')
        .select(['d.id AS id', 'c.id AS clock_id', 'c.name AS clock_name', 'c.mobility AS mobility', 'd.arrived_at AS arrived_at', 'd.departed_at AS departed_at', 'd.note AS note'])
        .where('d.site_id = :siteId', { siteId }).orderBy('d.arrived_at', 'ASC').getRawMany<{ clock_id: string; clock_name: string; mobility: ClockRow['mobility']; arrived_at: Date; departed_at: Date | null; note: string }>();
      const stationary = await dataSource.getRepository(ClockEntity).find({ where: { siteId, mobility: 'stationary' }, order: { name: 'ASC' } });
      return [
        ...deployed.map((r) => ({ clock: { id: r.clock_id, name: r.clock_name, mobility: r.mobility }, arrivedAt: new Date(r.arrived_at).toISOString(), departedAt: r.departed_at ? new Date(r.departed_at).toISOString() : null, note: r.note })),
        ...stationary.map((c) => ({ clock: { id: c.id, name: c.name, mobility: c.mobility }, arrivedAt: null, departedAt: null, note: 'stationary clock registered at this site' })),
      ];
    },
  };
}
