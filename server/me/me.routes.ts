import { z } from 'zod';
import { adminApiTokenSchema, adminTokenQuerySchema, apiTokenSchema, auditEventSchema, createApiTokenSchema, createdApiTokenSchema, createInstituteSchema, instituteSchema, meSchema, sessionIdParamsSchema, sessionSchema, updateInstituteSchema, updateUserSchema, userListQuery, userSchema } from '../../shared/auth';
import { idParamsSchema, pageOf, pageQuerySchema, wholePage } from '../../shared/http';
import { toAuditEventDto } from '../audit/audit.service';
import { AuditEventEntity, InstituteEntity } from '../db/entities/core.entities';
import { route } from '../http/route';
import { createInstitutesService } from '../institutes/institutes.service';
import { createTokensService } from '../tokens/tokens.service';
import { createUsersService, toInstituteDto } from '../users/users.service';
import { createSessionsService } from '../users/sessions.service';
import { authorize } from '../auth/permissions';
import { Unavailable } from '../http/errors';
import { csrfTokenFor } from '../auth/csrf';

// Foundation routes: who am I, institutes, users, personal tokens, the audit trail and the dev mailbox.
export const foundationRoutes = [
  route({
    method: 'get', path: '/api/v1/me', summary: 'The signed-in person', tag: 'account', permission: 'me:read', response: meSchema,
    handler: async ({ actor, req, deps }) => {
      const institute = actor.instituteId ? await deps.dataSource.getRepository(InstituteEntity).findOneBy({ id: actor.instituteId }) : null;
      return {
        id: actor.userId, email: actor.email, displayName: actor.displayName, role: actor.role,
        institute: toInstituteDto(institute), via: actor.via,
        csrfToken: actor.via === 'session' ? csrfTokenFor(req) : null,
      };
    },
  }),
  route({
    method: 'get', path: '/api/v1/institutes', summary: 'All institutes', tag: 'institutes', permission: 'institutes:read',
    response: pageOf(instituteSchema),
    handler: async ({ actor, deps }) => wholePage(await createInstitutesService(deps.dataSource).list(actor)),
  }),
  route({
    method: 'post', path: '/api/v1/institutes', summary: 'Register an institute', tag: 'institutes', permission: 'institutes:write',
    body: createInstituteSchema, response: instituteSchema, successStatus: 201,
    handler: ({ actor, body, deps }) => createInstitutesService(deps.dataSource).create(actor, body),
  }),
  route({
    method: 'get', path: '/api/v1/users', summary: 'People with access', tag: 'users', permission: 'users:read',
    query: userListQuery, response: pageOf(userSchema),
    handler: ({ actor, query, deps }) => createUsersService(deps.dataSource).list(actor, query),
  }),
  route({
    method: 'patch', path: '/api/v1/users/:id', summary: "Change a person's role or institute", tag: 'users', permission: 'users:write',
    params: idParamsSchema, body: updateUserSchema, response: userSchema,
    handler: ({ actor, params, body, deps }) => createUsersService(deps.dataSource).update(actor, params.id, body),
  }),
  route({
    method: 'get', path: '/api/v1/me/tokens', summary: 'My API tokens', tag: 'account', permission: 'tokens:own',
    response: pageOf(apiTokenSchema),
    handler: async ({ actor, deps }) => wholePage(await createTokensService(deps.dataSource).listOwn(actor)),
  }),
  route({
    method: 'post', path: '/api/v1/me/tokens', summary: 'Create an API token (secret shown once)', tag: 'account', permission: 'tokens:own',
    body: createApiTokenSchema, response: createdApiTokenSchema, successStatus: 201,
    handler: ({ actor, body, deps }) => createTokensService(deps.dataSource).createOwn(actor, body.name, body.expiresInDays),
  }),
  route({
    method: 'delete', path: '/api/v1/me/tokens/:id', summary: 'Revoke one of my API tokens', tag: 'account', permission: 'tokens:own',
    params: idParamsSchema,
    handler: async ({ actor, params, deps }) => {
      await createTokensService(deps.dataSource).revokeOwn(actor, params.id);
      return undefined;
    },
  }),
  route({
    method: 'get', path: '/api/v1/audit-events', summary: 'The audit trail (newest first), optionally for one record', tag: 'audit', permission: 'audit:read',
    query: pageQuerySchema.extend({ entityType: z.string().max(40).optional(), entityId: z.string().max(80).optional() }),
    response: pageOf(auditEventSchema),
    handler: async ({ actor, query, deps }) => {
      authorize(actor, 'audit:read');
      const qb = deps.dataSource.getRepository(AuditEventEntity).createQueryBuilder('a').orderBy('a.id', 'DESC');
      if (query.entityType) qb.andWhere('a.entity_type = :t', { t: query.entityType });
      if (query.entityId) qb.andWhere('a.entity_id = :e', { e: query.entityId });
      const [rows, total] = await qb.skip((query.page - 1) * query.pageSize).take(query.pageSize).getManyAndCount();
      return { items: rows.map(toAuditEventDto), total, page: query.page, pageSize: query.pageSize };
    },
  }),
  route({
    method: 'get', path: '/api/v1/dev/mailbox', summary: 'Messages caught by the local test mailbox (development)', tag: 'admin', permission: 'mailbox:read',
    response: pageOf(z.object({ id: z.number(), receivedAt: z.string(), from: z.string(), to: z.array(z.string()), subject: z.string(), text: z.string() })),
    db: 'primary', // sends the queued mail first (outbox rows are updated): never on a read replica
    handler: async ({ deps }) => {
      await deps.mail.flush();
      const res = await fetch(`${deps.config.mailboxUrl}/messages`).catch(() => null);
      if (!res?.ok) throw new Unavailable('The local test mailbox is not reachable.');
      return wholePage(((await res.json()) as unknown[]).reverse());
    },
  }),
  // Accounts, tokens and sessions (administrators).
  route({
    method: 'patch', path: '/api/v1/institutes/:id', summary: "Edit an institute's name, city or kind", tag: 'institutes', permission: 'institutes:write',
    params: idParamsSchema, body: updateInstituteSchema, response: instituteSchema,
    handler: ({ actor, params, body, deps }) => createInstitutesService(deps.dataSource).update(actor, params.id, body),
  }),
  route({
    method: 'post', path: '/api/v1/users/:id/deactivate', summary: 'Deactivate a person: sign-in refused, sessions and tokens end', tag: 'users', permission: 'users:write',
    params: idParamsSchema, response: userSchema,
    handler: ({ actor, params, deps }) => createUsersService(deps.dataSource).setActive(actor, params.id, false),
  }),
  route({
    method: 'post', path: '/api/v1/users/:id/reactivate', summary: 'Reactivate a person (old tokens stay revoked)', tag: 'users', permission: 'users:write',
    params: idParamsSchema, response: userSchema,
    handler: ({ actor, params, deps }) => createUsersService(deps.dataSource).setActive(actor, params.id, true),
  }),
  route({
    method: 'get', path: '/api/v1/admin/tokens', summary: "Everyone's API tokens (newest first)", tag: 'admin', permission: 'users:read',
    query: adminTokenQuerySchema, response: pageOf(adminApiTokenSchema),
    handler: ({ actor, query, deps }) => createTokensService(deps.dataSource).listAll(actor, { ...query, order: 'desc' }),
  }),
  route({
    method: 'delete', path: '/api/v1/admin/tokens/:id', summary: "Revoke anyone's API token", tag: 'admin', permission: 'users:write',
    params: idParamsSchema,
    handler: async ({ actor, params, deps }) => {
      await createTokensService(deps.dataSource).revokeAny(actor, params.id);
      return undefined;
    },
  }),
  route({
    method: 'get', path: '/api/v1/admin/sessions', summary: 'Open browser sessions of everyone', tag: 'admin', permission: 'users:read',
    query: adminTokenQuerySchema.pick({ page: true, pageSize: true, userId: true }), response: pageOf(sessionSchema),
    handler: ({ actor, query, deps }) => createSessionsService(deps.dataSource).list(actor, query),
  }),
  route({
    method: 'delete', path: '/api/v1/admin/sessions/:id', summary: 'End a browser session', tag: 'admin', permission: 'users:write',
    params: sessionIdParamsSchema,
    handler: async ({ actor, params, deps }) => {
      await createSessionsService(deps.dataSource).end(actor, params.id);
      return undefined;
    },
  }),
];
