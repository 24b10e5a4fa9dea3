import { z } from 'zod';
import { nameText, pageQuerySchema, patchOf, sortableBy } from './http';

export const roles = ['operator', 'coordinator', 'auditor', 'admin'] as const;
export const roleSchema = z.enum(roles);
export type Role = z.infer<typeof roleSchema>;

export const roleLabels: Record<Role, string> = {
  operator: 'Lab staff',
  coordinator: 'Coordinating institute',
  auditor: 'Auditor',
  admin: 'Administrator',
};

export const instituteSchema = z.object({
  id: z.string().uuid(),
  code: z.string(),
  name: z.string(),
  city: z.string().nullable(),
  kind: z.enum(['laboratory', 'coordinating', 'audit', 'other']),
});
export type Institute = z.infer<typeof instituteSchema>;

export const meSchema = z.object({
  id: z.string().uuid(),
  email: z.string(),
  displayName: z.string(),
  role: roleSchema,
  institute: instituteSchema.nullable(),
  via: z.enum(['session', 'token']),
  csrfToken: z.string().nullable(),
});
export type Me = z.infer<typeof meSchema>;

export const userSchema = z.object({
  id: z.string().uuid(),
  email: z.string(),
  displayName: z.string(),
  role: roleSchema,
  institute: instituteSchema.nullable(),
  lastSignInAt: z.string().nullable(),
  createdAt: z.string(),
  /** Set when an administrator deactivated the person (sign-in refused, sessions and tokens ended). */
  deactivatedAt: z.string().nullable(),
});
export type User = z.infer<typeof userSchema>;

export const createInstituteSchema = z.object({
  code: z.string().trim().min(2).max(24).regex(/^[A-Z0-9-]+$/, 'upper-case letters, digits and hyphens'),
  name: nameText(2, 200),
  city: nameText(0, 120).nullable().default(null),
  kind: z.enum(['laboratory', 'coordinating', 'audit', 'other']),
});
export type CreateInstitute = z.infer<typeof createInstituteSchema>;

export const updateUserSchema = z.object({
  role: roleSchema.optional(),
  instituteId: z.string().uuid().nullable().optional(),
});

export const apiTokenSchema = z.object({
  id: z.string().uuid(),
  name: z.string(),
  prefix: z.string(),
  createdAt: z.string(),
  lastUsedAt: z.string().nullable(),
  revokedAt: z.string().nullable(),
  expiresAt: z.string(),
});
export type ApiToken = z.infer<typeof apiTokenSchema>;
/** API token lifetime in days: chosen at creation, 90 unless asked otherwise, at most a year. */
export const DEFAULT_TOKEN_DAYS = 90;
export const MAX_TOKEN_DAYS = 365;
export const createApiTokenSchema = z.object({
  name: nameText(1, 80),
  expiresInDays: z.number().int().min(1).max(MAX_TOKEN_DAYS).default(DEFAULT_TOKEN_DAYS),
});
export const createdApiTokenSchema = z.object({ token: apiTokenSchema, secret: z.string() });

export const auditEventSchema = z.object({
  id: z.string(),
  at: z.string(),
  actorLabel: z.string(),
  action: z.string(),
  entityType: z.string(),
  entityId: z.string().nullable(),
  details: z.record(z.string(), z.unknown()),
  hash: z.string(),
});
export type AuditEvent = z.infer<typeof auditEventSchema>;

// Administration of accounts, tokens and sessions.
export const personRefSchema = z.object({ id: z.string().uuid(), email: z.string(), displayName: z.string() });
export const adminApiTokenSchema = apiTokenSchema.extend({ owner: personRefSchema.nullable() });
export type AdminApiToken = z.infer<typeof adminApiTokenSchema>;
export const adminTokenQuerySchema = z.object({
  page: z.coerce.number().int().min(1).default(1),
  pageSize: z.coerce.number().int().min(1).max(500).default(25),
  userId: z.string().uuid().optional(),
  active: z.enum(['true', 'false']).optional().transform((v) => v === 'true'),
});
/** A browser session; `id` is the SHA-256 of the session id, so the cookie value itself is never shown. */
export const sessionSchema = z.object({
  id: z.string().regex(/^[0-9a-f]{64}$/),
  person: personRefSchema,
  signedInAt: z.string().nullable(),
  expiresAt: z.string(),
});
export type SessionInfo = z.infer<typeof sessionSchema>;
export const sessionIdParamsSchema = z.object({ id: z.string().regex(/^[0-9a-f]{64}$/) });
/** The code is the institute's identity in assertions and certificates, so it is not editable. */
export const updateInstituteSchema = patchOf(createInstituteSchema.omit({ code: true }));
export type UpdateInstitute = z.infer<typeof updateInstituteSchema>;
export const userSortFields = ['email', 'displayName', 'role', 'lastSignInAt'] as const;
export const userListQuery = pageQuerySchema.extend({ sort: sortableBy(userSortFields) });
export type UserListQuery = z.infer<typeof userListQuery>;
