import { z } from 'zod';
import { nameText, pageQuerySchema, sortableBy } from './http';

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
});
export type ApiToken = z.infer<typeof apiTokenSchema>;
export const createApiTokenSchema = z.object({ name: nameText(1, 80) });
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

export const userSortFields = ['email', 'displayName', 'role', 'lastSignInAt'] as const;
export const userListQuery = pageQuerySchema.extend({ sort: sortableBy(userSortFields) });
export type UserListQuery = z.infer<typeof userListQuery>;
