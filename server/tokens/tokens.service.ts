import crypto from 'node:crypto';
import type { DataSource } from 'typeorm';
import { recordAudit } from '../audit/audit.service';
import type { Actor } from '../auth/actor';
import { authorize } from '../auth/permissions';
import { ApiTokenEntity, UserEntity, type ApiTokenRow } from '../db/entities/core.entities';
import { NotFound } from '../http/errors';

// Personal API tokens: the secret is shown once; only its SHA-256 is stored.
const TOKEN_PREFIX = 'clv_';

export const hashToken = (secret: string) => crypto.createHash('sha256').update(secret).digest('hex');

export function toTokenDto(t: ApiTokenRow) {
  return {
    id: t.id,
    name: t.name,
    prefix: t.prefix,
    createdAt: t.createdAt.toISOString(),
    lastUsedAt: t.lastUsedAt ? t.lastUsedAt.toISOString() : null,
    revokedAt: t.revokedAt ? t.revokedAt.toISOString() : null,
  };
}

export async function issueToken(dataSource: DataSource, userId: string, name: string, actor: Actor | null) {
  const secret = TOKEN_PREFIX + crypto.randomBytes(24).toString('base64url');
  return dataSource.transaction(async (m) => {
    const repo = m.getRepository(ApiTokenEntity);
    const row = await repo.save(repo.create({ userId, name, prefix: secret.slice(0, 10), tokenHash: hashToken(secret) }));
    await recordAudit(m, actor, { action: 'token.created', entityType: 'api-token', entityId: row.id, details: { userId, name } });
    return { token: toTokenDto(row), secret };
  });
}

export async function actorFromToken(dataSource: DataSource, secret: string): Promise<Actor | null> {
  if (!secret.startsWith(TOKEN_PREFIX)) return null;
  const repo = dataSource.getRepository(ApiTokenEntity);
  const token = await repo.findOneBy({ tokenHash: hashToken(secret) });
  if (!token || token.revokedAt) return null;
  const user = await dataSource.getRepository(UserEntity).findOneBy({ id: token.userId });
  if (!user) return null;
  if (!token.lastUsedAt || Date.now() - token.lastUsedAt.getTime() > 60_000) {
    await repo.update({ id: token.id }, { lastUsedAt: new Date() });
  }
  return { userId: user.id, email: user.email, displayName: user.displayName, role: user.role, instituteId: user.instituteId, via: 'token' };
}

export function createTokensService(dataSource: DataSource) {
  return {
    async listOwn(actor: Actor) {
      authorize(actor, 'tokens:own');
      const rows = await dataSource.getRepository(ApiTokenEntity).find({ where: { userId: actor.userId }, order: { createdAt: 'DESC' } });
      return rows.map(toTokenDto);
    },
    async createOwn(actor: Actor, name: string) {
      authorize(actor, 'tokens:own');
      return issueToken(dataSource, actor.userId, name, actor);
    },
    async revokeOwn(actor: Actor, id: string) {
      authorize(actor, 'tokens:own');
      await dataSource.transaction(async (m) => {
        const repo = m.getRepository(ApiTokenEntity);
        const row = await repo.findOneBy({ id, userId: actor.userId });
        if (!row) throw new NotFound('API token');
        if (!row.revokedAt) await repo.update({ id }, { revokedAt: new Date() });
        await recordAudit(m, actor, { action: 'token.revoked', entityType: 'api-token', entityId: id });
      });
    },
  };
}
