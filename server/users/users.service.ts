import type { DataSource } from 'typeorm';
import type { Role } from '../../shared/auth';
import type { UserListQuery } from '../../shared/auth';
import { recordAudit } from '../audit/audit.service';
import type { Actor } from '../auth/actor';
import { authorize } from '../auth/permissions';
import { InstituteEntity, UserEntity, type InstituteRow, type UserRow } from '../db/entities/core.entities';
import { Invalid, NotFound } from '../http/errors';

export function toInstituteDto(i: InstituteRow | null | undefined) {
  return i ? { id: i.id, code: i.code, name: i.name, city: i.city, kind: i.kind } : null;
}

export function toUserDto(u: UserRow) {
  return {
    id: u.id,
    email: u.email,
    displayName: u.displayName,
    role: u.role,
    institute: toInstituteDto(u.institute),
    lastSignInAt: u.lastSignInAt ? u.lastSignInAt.toISOString() : null,
    createdAt: u.createdAt.toISOString(),
  };
}

/** Just-in-time provisioning: the identity provider is authoritative for role and institute. */
export async function upsertUserFromSignIn(
  dataSource: DataSource,
  input: { email: string; displayName: string; role: Role; instituteCode: string | null },
): Promise<UserRow> {
  return dataSource.transaction(async (m) => {
    const institute = input.instituteCode
      ? await m.getRepository(InstituteEntity).findOneBy({ code: input.instituteCode })
      : null;
    if (input.instituteCode && !institute) throw new Error(`unknown institute '${input.instituteCode}' in the assertion`);
    if (input.role === 'operator' && !institute) throw new Error('lab staff must belong to an institute');
    const repo = m.getRepository(UserEntity);
    let user = await repo.findOneBy({ email: input.email });
    const created = !user;
    user = repo.merge(user ?? repo.create({ email: input.email }), {
      displayName: input.displayName,
      role: input.role,
      instituteId: institute?.id ?? null,
      lastSignInAt: new Date(),
    });
    user = await repo.save(user);
    const actor: Actor = { userId: user.id, email: user.email, displayName: user.displayName, role: user.role, instituteId: user.instituteId, via: 'session' };
    await recordAudit(m, actor, { action: created ? 'user.provisioned' : 'user.signed-in', entityType: 'user', entityId: user.id, instituteId: user.instituteId });
    return user;
  });
}

export async function findActorByUserId(dataSource: DataSource, userId: string): Promise<Actor | null> {
  const u = await dataSource.getRepository(UserEntity).findOneBy({ id: userId });
  return u ? { userId: u.id, email: u.email, displayName: u.displayName, role: u.role, instituteId: u.instituteId, via: 'session' } : null;
}

const userSort = new Map<NonNullable<UserListQuery['sort']>, string>([['email', 'u.email'], ['displayName', 'u.display_name'], ['role', 'u.role'], ['lastSignInAt', 'u.last_sign_in_at']]);

export function createUsersService(dataSource: DataSource) {
  return {
    async list(actor: Actor, q: UserListQuery) {
      authorize(actor, 'users:read');
      const qb = dataSource.getRepository(UserEntity).createQueryBuilder('u').leftJoinAndSelect('u.institute', 'i');
      if (q.q) qb.where('(u.email ILIKE :q OR u.display_name ILIKE :q OR i.code ILIKE :q)', { q: `%${q.q}%` });
      qb.orderBy(userSort.get(q.sort ?? 'email') ?? 'u.email', q.order === 'desc' ? 'DESC' : 'ASC');
      const [rows, total] = await qb.skip((q.page - 1) * q.pageSize).take(q.pageSize).getManyAndCount();
      return { items: rows.map(toUserDto), total, page: q.page, pageSize: q.pageSize };
    },
    async update(actor: Actor, id: string, patch: { role?: Role; instituteId?: string | null }) {
      authorize(actor, 'users:write');
      return dataSource.transaction(async (m) => {
        const repo = m.getRepository(UserEntity);
        const user = await repo.findOne({ where: { id }, relations: { institute: true } });
        if (!user) throw new NotFound('User');
        if (patch.instituteId && !(await m.getRepository(InstituteEntity).findOneBy({ id: patch.instituteId }))) {
          throw new Invalid('Unknown institute.', [{ path: 'body.instituteId', message: 'no such institute' }]);
        }
        const before = { role: user.role, instituteId: user.instituteId };
        const next = { role: patch.role ?? user.role, instituteId: patch.instituteId !== undefined ? patch.instituteId : user.instituteId };
        if (next.role === 'operator' && !next.instituteId) {
          throw new Invalid('Lab staff must belong to an institute.', [{ path: 'body.instituteId', message: 'required for lab staff' }]);
        }
        // An UPDATE of the columns themselves: saving the loaded entity let its `institute` relation win over the
        // changed institute id, so the row stayed as it was while the audit event said otherwise.
        await repo.update({ id }, next);
        const fresh = (await repo.findOne({ where: { id }, relations: { institute: true } }))!;
        const after = { role: fresh.role, instituteId: fresh.instituteId };
        await recordAudit(m, actor, { action: 'user.updated', entityType: 'user', entityId: id, details: { before, after } });
        return toUserDto(fresh);
      });
    },
  };
}
