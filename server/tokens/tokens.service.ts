import crypto from 'node:crypto';
import type { DataSource } from 'typeorm';
import type { PageQuery } from '../../shared/http';
import { DEFAULT_TOKEN_DAYS, MAX_TOKEN_DAYS } from '../../shared/auth';
import { recordAudit } from '../audit/audit.service';
import type { Actor } from '../auth/actor';
import { authorize } from '../auth/permissions';
import { ApiTokenEntity, UserEntity, type ApiTokenRow, type UserRow } from '../db/entities/core.entities';
import { Invalid, NotFound } from '../http/errors';
import { forgetToken, type TokenCache } from './token-cache';

// Personal API tokens: the secret is shown once; only its SHA-256 is stored. Every token expires (chosen at
// creation, at most a year: OWASP ASVS 4.0.3 V3.5 token-based session management, common practice for the
// length); a token of a deactivated person stops working at once.
const TOKEN_PREFIX = 'clv_';
const DAY_MS = 86_400_000;

export const hashToken = (secret: string) => crypto.createHash('sha256').update(secret).digest('hex');

export function toTokenDto(t: ApiTokenRow) {
  return {
    id: t.id,
    name: t.name,
    prefix: t.prefix,
    createdAt: t.createdAt.toISOString(),
    lastUsedAt: t.lastUsedAt ? t.lastUsedAt.toISOString() : null,
    revokedAt: t.revokedAt ? t.revokedAt.toISOString() : null,
    expiresAt: t.expiresAt.toISOString(),
  };
}

export async function issueToken(dataSource: DataSource, userId: string, name: string, actor: Actor | null, expiresInDays: number = DEFAULT_TOKEN_DAYS) {
  if (!Number.isInteger(expiresInDays) || expiresInDays < 1 || expiresInDays > MAX_TOKEN_DAYS) {
    throw new Invalid(`A token lives 1 to ${MAX_TOKEN_DAYS} days.`, [{ path: 'body.expiresInDays', message: `1 to ${MAX_TOKEN_DAYS}` }]);
  }
  const secret = TOKEN_PREFIX + crypto.randomBytes(24).toString('base64url');
  return dataSource.transaction(async (m) => {
    const repo = m.getRepository(ApiTokenEntity);
    const createdAt = new Date();
    const expiresAt = new Date(createdAt.getTime() + expiresInDays * DAY_MS);
    const row = await repo.save(repo.create({ userId, name, prefix: secret.slice(0, 10), tokenHash: hashToken(secret), createdAt, expiresAt }));
    await recordAudit(m, actor, { action: 'token.created', entityType: 'api-token', entityId: row.id, details: { userId, name, expiresAt: expiresAt.toISOString() } });
    return { token: toTokenDto(row), secret };
  });
}

export async function actorFromToken(dataSource: DataSource, secret: string, cache: TokenCache | null = null): Promise<Actor | null> {
  if (!secret.startsWith(TOKEN_PREFIX)) return null;
  const hash = hashToken(secret);
  // A cached entry is never stale (token-cache.ts): changes drop it before it is served; its expiry is checked here.
  const hit = cache ? await cache.get(hash) : null;
  if (hit) {
    if (hit.lastUsedAt === null || Date.now() - hit.lastUsedAt > 60_000) {
      hit.lastUsedAt = Date.now();
      await dataSource.getRepository(ApiTokenEntity).update({ id: hit.tokenId }, { lastUsedAt: new Date(hit.lastUsedAt) });
    }
    return { ...hit.actor };
  }
  const mark = cache?.mark() ?? 0;
  const startedAt = Date.now();
  // One indexed statement (token_hash is UNIQUE): the token and its person together; revocation, expiry and
  // deactivation are checked by the statement itself.
  const [row]: { token_id: string; last_used_at: Date | null; expires_at: Date; user_id: string; email: string; display_name: string; role: Actor['role']; institute_id: string | null }[] = await dataSource.query(
    `SELECT t.id AS token_id, t.last_used_at, t.expires_at, u.id AS user_id, u.email, u.display_name, u.role, u.institute_id
       FROM api_token t JOIN app_user u ON u.id = t.user_id
      WHERE t.token_hash = $1 AND t.revoked_at IS NULL AND t.expires_at > now() AND u.deactivated_at IS NULL`,
    [hash],
  );
  if (!row) return null;
  let lastUsedAt = row.last_used_at ? row.last_used_at.getTime() : null;
  if (lastUsedAt === null || Date.now() - lastUsedAt > 60_000) {
    lastUsedAt = Date.now();
    await dataSource.getRepository(ApiTokenEntity).update({ id: row.token_id }, { lastUsedAt: new Date(lastUsedAt) });
  }
  const actor: Actor = { userId: row.user_id, email: row.email, displayName: row.display_name, role: row.role, instituteId: row.institute_id, via: 'token' };
  cache?.put(hash, { tokenId: row.token_id, actor: { ...actor }, expiresAt: row.expires_at.getTime(), lastUsedAt, storedAt: startedAt }, mark);
  return actor;
}

const ownerOf = (u: UserRow | undefined) => (u ? { id: u.id, email: u.email, displayName: u.displayName } : null);

export function createTokensService(dataSource: DataSource) {
  async function revoke(actor: Actor, id: string, where: { id: string; userId?: string }) {
    await dataSource.transaction(async (m) => {
      const repo = m.getRepository(ApiTokenEntity);
      const row = await repo.findOneBy(where);
      if (!row) throw new NotFound('API token');
      if (!row.revokedAt) await repo.update({ id }, { revokedAt: new Date() });
      await recordAudit(m, actor, { action: 'token.revoked', entityType: 'api-token', entityId: id, details: { userId: row.userId } });
    });
    forgetToken(dataSource, id);
  }
  return {
    async listOwn(actor: Actor) {
      authorize(actor, 'tokens:own');
      const rows = await dataSource.getRepository(ApiTokenEntity).find({ where: { userId: actor.userId }, order: { createdAt: 'DESC' } });
      return rows.map(toTokenDto);
    },
    async createOwn(actor: Actor, name: string, expiresInDays?: number) {
      authorize(actor, 'tokens:own');
      return issueToken(dataSource, actor.userId, name, actor, expiresInDays);
    },
    async revokeOwn(actor: Actor, id: string) {
      authorize(actor, 'tokens:own');
      await revoke(actor, id, { id, userId: actor.userId });
    },
    /** Every person's tokens (administrators), newest first, optionally of one person; active ones only if asked. */
    async listAll(actor: Actor, q: PageQuery & { userId?: string; active?: boolean }) {
      authorize(actor, 'users:read');
      const qb = dataSource.getRepository(ApiTokenEntity).createQueryBuilder('t').orderBy('t.created_at', 'DESC');
      if (q.userId) qb.andWhere('t.user_id = :u', { u: q.userId });
      if (q.active) qb.andWhere('t.revoked_at IS NULL AND t.expires_at > now()');
      const [rows, total] = await qb.skip((q.page - 1) * q.pageSize).take(q.pageSize).getManyAndCount();
      const users = rows.length ? await dataSource.getRepository(UserEntity).createQueryBuilder('u').where('u.id IN (:...ids)', { ids: [...new Set(rows.map((r) => r.userId))] }).getMany() : [];
      const byId = new Map(users.map((u) => [u.id, u]));
      return { items: rows.map((r) => ({ ...toTokenDto(r), owner: ownerOf(byId.get(r.userId)) })), total, page: q.page, pageSize: q.pageSize };
    },
    async revokeAny(actor: Actor, id: string) {
      authorize(actor, 'users:write');
      await revoke(actor, id, { id });
    },
  };
}
