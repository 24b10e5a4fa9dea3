import type { DataSource } from 'typeorm';
import type { Role } from '../../shared/auth';
import type { UserListQuery } from '../../shared/auth';
import { recordAudit } from '../audit/audit.service';
import type { Actor } from '../auth/actor';
import { authorize } from '../auth/permissions';
import { InstituteEntity, UserEntity, type InstituteRow, type UserRow } from '../db/entities/core.entities';
import { Conflict, Invalid, NotFound } from '../http/errors';
import { forgetUserTokens } from '../tokens/token-cache';

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
    deactivatedAt: u.deactivatedAt ? u.deactivatedAt.toISOString() : null,
  };
}

/**
 * Just-in-time provisioning. Who is authoritative (docs/decisions/0006-role-authority.md): the identity
 * provider for identity (e-mail, display name) and for the role and institute of a person signing in for the
 * first time; from then on the local administrator. A later assertion with another role or institute changes
 * nothing here (the caller logs it), so a role set in the administration page stays.
 */
export async function upsertUserFromSignIn(
  dataSource: DataSource,
  input: { email: string; displayName: string; role: Role; instituteCode: string | null },
): Promise<{ user: UserRow; assertedDiffers: boolean }> {
  const done = await dataSource.transaction(async (m) => {
    const institute = input.instituteCode
      ? await m.getRepository(InstituteEntity).findOneBy({ code: input.instituteCode })
      : null;
    const repo = m.getRepository(UserEntity);
    let user = await repo.findOneBy({ email: input.email });
    const created = !user;
    if (!user) {
      if (input.instituteCode && !institute) throw new Error(`unknown institute '${input.instituteCode}' in the assertion`);
      if (input.role === 'operator' && !institute) throw new Error('lab staff must belong to an institute');
      user = repo.create({ email: input.email, role: input.role, instituteId: institute?.id ?? null });
    }
    const assertedDiffers = !created && (user.role !== input.role || user.instituteId !== (institute?.id ?? null));
    user.displayName = input.displayName;
    user.lastSignInAt = new Date();
    user = await repo.save(user);
    const actor: Actor = { userId: user.id, email: user.email, displayName: user.displayName, role: user.role, instituteId: user.instituteId, via: 'session' };
    await recordAudit(m, actor, {
      action: created ? 'user.provisioned' : 'user.signed-in', entityType: 'user', entityId: user.id, instituteId: user.instituteId,
      ...(assertedDiffers ? { details: { assertedRole: input.role, assertedInstitute: input.instituteCode, keptRole: user.role } } : {}),
    });
    return { user, assertedDiffers };
  });
  // The display name may have changed (and the cached tokens of this person carry it).
  forgetUserTokens(dataSource, done.user.id);
  return done;
}

export async function findActorByUserId(dataSource: DataSource, userId: string): Promise<Actor | null> {
  const u = await dataSource.getRepository(UserEntity).findOneBy({ id: userId });
  return u && !u.deactivatedAt ? { userId: u.id, email: u.email, displayName: u.displayName, role: u.role, instituteId: u.instituteId, via: 'session' } : null;
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
      const dto = await dataSource.transaction(async (m) => {
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
      forgetUserTokens(dataSource, id);
      return dto;
    },
    /** Deactivation ends everything at once: sign-in refused, every session deleted, every token revoked. */
    async setActive(actor: Actor, id: string, active: boolean) {
      authorize(actor, 'users:write');
      if (!active && id === actor.userId) throw new Conflict('You cannot deactivate yourself; ask another administrator.');
      const dto = await dataSource.transaction(async (m) => {
        const repo = m.getRepository(UserEntity);
        const user = await repo.findOne({ where: { id }, relations: { institute: true } });
        if (!user) throw new NotFound('User');
        if (!active) {
          if (!user.deactivatedAt) await repo.update({ id }, { deactivatedAt: new Date() });
          // TypeORM answers DELETE/UPDATE … RETURNING with [rows, count].
          const [sessions]: [unknown[], number] = await m.query(`DELETE FROM "session" WHERE sess -> 'passport' ->> 'user' = $1 RETURNING sid`, [id]);
          const [tokens]: [unknown[], number] = await m.query('UPDATE api_token SET revoked_at = now() WHERE user_id = $1 AND revoked_at IS NULL RETURNING id', [id]);
          await recordAudit(m, actor, { action: 'user.deactivated', entityType: 'user', entityId: id, instituteId: user.instituteId, details: { sessionsEnded: sessions.length, tokensRevoked: tokens.length } });
        } else {
          if (user.deactivatedAt) await repo.update({ id }, { deactivatedAt: null });
          await recordAudit(m, actor, { action: 'user.reactivated', entityType: 'user', entityId: id, instituteId: user.instituteId });
        }
        const fresh = await repo.findOne({ where: { id }, relations: { institute: true } });
        return toUserDto(fresh!);
      });
      forgetUserTokens(dataSource, id);
      return dto;
    },
  };
}
