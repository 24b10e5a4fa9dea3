import type { DataSource } from 'typeorm';
import type { CreateInstitute, UpdateInstitute } from '../../shared/auth';
import { recordAudit } from '../audit/audit.service';
import type { Actor } from '../auth/actor';
import { authorize } from '../auth/permissions';
import { InstituteEntity } from '../db/entities/core.entities';
import { Conflict, Invalid, NotFound } from '../http/errors';
import { toInstituteDto } from '../users/users.service';

export function createInstitutesService(dataSource: DataSource) {
  return {
    async list(actor: Actor) {
      authorize(actor, 'institutes:read');
      const rows = await dataSource.getRepository(InstituteEntity).find({ order: { code: 'ASC' } });
      return rows.map((r) => toInstituteDto(r)!);
    },
    async create(actor: Actor, input: CreateInstitute) {
      authorize(actor, 'institutes:write');
      return dataSource.transaction(async (m) => {
        const repo = m.getRepository(InstituteEntity);
        if (await repo.findOneBy({ code: input.code })) throw new Conflict(`An institute with code ${input.code} exists.`);
        const row = await repo.save(repo.create(input));
        await recordAudit(m, actor, { action: 'institute.created', entityType: 'institute', entityId: row.id, details: { ...input } });
        return toInstituteDto(row)!;
      });
    },
    async update(actor: Actor, id: string, patch: UpdateInstitute) {
      authorize(actor, 'institutes:write');
      return dataSource.transaction(async (m) => {
        const repo = m.getRepository(InstituteEntity);
        const row = await repo.findOneBy({ id });
        if (!row) throw new NotFound('Institute');
        const before = { name: row.name, city: row.city, kind: row.kind };
        const changes = Object.fromEntries(Object.entries(patch).filter(([, v]) => v !== undefined));
        if (!Object.keys(changes).length) throw new Invalid('Nothing to change: send name, city or kind (the code cannot change).', [{ path: 'body', message: 'no editable field' }]);
        await repo.update({ id }, changes);
        await recordAudit(m, actor, { action: 'institute.updated', entityType: 'institute', entityId: id, instituteId: id, details: { before, after: changes } });
        return toInstituteDto(await repo.findOneByOrFail({ id }))!;
      });
    },
  };
}
