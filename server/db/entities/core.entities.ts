import { EntitySchema } from 'typeorm';
import type { Role } from '../../../shared/auth';

// Core tables of the foundation. EntitySchema (not decorators) keeps tsx/esbuild free of decorator metadata.

export interface InstituteRow {
  id: string;
  code: string;
  name: string;
  city: string | null;
  kind: 'laboratory' | 'coordinating' | 'audit' | 'other';
  createdAt: Date;
}
export const InstituteEntity = new EntitySchema<InstituteRow>({
  name: 'Institute',
  tableName: 'institute',
  columns: {
    id: { type: 'uuid', primary: true, generated: 'uuid' },
    code: { type: 'text', unique: true },
    name: { type: 'text' },
    city: { type: 'text', nullable: true },
    kind: { type: 'text' },
    createdAt: { name: 'created_at', type: 'timestamptz', createDate: true },
  },
});

export interface UserRow {
  id: string;
  email: string;
  displayName: string;
  role: Role;
  instituteId: string | null;
  institute?: InstituteRow | null;
  createdAt: Date;
  lastSignInAt: Date | null;
  /** Set by an administrator: sign-in refused, sessions and tokens ended. */
  deactivatedAt: Date | null;
}
export const UserEntity = new EntitySchema<UserRow>({
  name: 'User',
  tableName: 'app_user',
  columns: {
    id: { type: 'uuid', primary: true, generated: 'uuid' },
    email: { type: 'text', unique: true },
    displayName: { name: 'display_name', type: 'text' },
    role: { type: 'text' },
    instituteId: { name: 'institute_id', type: 'uuid', nullable: true },
    createdAt: { name: 'created_at', type: 'timestamptz', createDate: true },
    lastSignInAt: { name: 'last_sign_in_at', type: 'timestamptz', nullable: true },
    deactivatedAt: { name: 'deactivated_at', type: 'timestamptz', nullable: true },
  },
  relations: {
    institute: { type: 'many-to-one', target: 'Institute', joinColumn: { name: 'institute_id' }, nullable: true },
  },
});

export interface ApiTokenRow {
  id: string;
  userId: string;
  name: string;
  prefix: string;
  tokenHash: string;
  createdAt: Date;
  lastUsedAt: Date | null;
  revokedAt: Date | null;
  expiresAt: Date;
}
export const ApiTokenEntity = new EntitySchema<ApiTokenRow>({
  name: 'ApiToken',
  tableName: 'api_token',
  columns: {
    id: { type: 'uuid', primary: true, generated: 'uuid' },
    userId: { name: 'user_id', type: 'uuid' },
    name: { type: 'text' },
    prefix: { type: 'text' },
    tokenHash: { name: 'token_hash', type: 'text', unique: true },
    createdAt: { name: 'created_at', type: 'timestamptz', createDate: true },
    lastUsedAt: { name: 'last_used_at', type: 'timestamptz', nullable: true },
    revokedAt: { name: 'revoked_at', type: 'timestamptz', nullable: true },
    expiresAt: { name: 'expires_at', type: 'timestamptz' },
  },
});

export interface AuditEventRow {
  id: string;
  at: Date;
  actorUserId: string | null;
  actorLabel: string;
  action: string;
  entityType: string;
  entityId: string | null;
  instituteId: string | null;
  details: Record<string, unknown>;
  prevHash: string | null;
  hash: string;
  hashVersion: number;
}
export const AuditEventEntity = new EntitySchema<AuditEventRow>({
  name: 'AuditEvent',
  tableName: 'audit_event',
  columns: {
    id: { type: 'bigint', primary: true, generated: 'increment' },
    at: { type: 'timestamptz', default: () => 'now()' },
    actorUserId: { name: 'actor_user_id', type: 'uuid', nullable: true },
    actorLabel: { name: 'actor_label', type: 'text' },
    action: { type: 'text' },
    entityType: { name: 'entity_type', type: 'text' },
    entityId: { name: 'entity_id', type: 'text', nullable: true },
    instituteId: { name: 'institute_id', type: 'uuid', nullable: true },
    details: { type: 'jsonb', default: () => "'{}'::jsonb" },
    prevHash: { name: 'prev_hash', type: 'text', nullable: true },
    hash: { type: 'text', default: () => "''" },
    hashVersion: { name: 'hash_version', type: 'smallint', default: 2 },
  },
});

export interface MailOutboxRow {
  id: string;
  toAddress: string;
  subject: string;
  textBody: string;
  createdAt: Date;
  sentAt: Date | null;
  attempts: number;
  lastError: string | null;
  state: 'pending' | 'sent' | 'dead';
  nextAttemptAt: Date;
  messageId: string | null;
  deadAt: Date | null;
  retriedAt: Date | null;
}
export const MailOutboxEntity = new EntitySchema<MailOutboxRow>({
  name: 'MailOutbox',
  tableName: 'mail_outbox',
  columns: {
    id: { type: 'uuid', primary: true, generated: 'uuid' },
    toAddress: { name: 'to_address', type: 'text' },
    subject: { type: 'text' },
    textBody: { name: 'text_body', type: 'text' },
    createdAt: { name: 'created_at', type: 'timestamptz', createDate: true },
    sentAt: { name: 'sent_at', type: 'timestamptz', nullable: true },
    attempts: { type: 'int', default: 0 },
    lastError: { name: 'last_error', type: 'text', nullable: true },
    state: { type: 'text', default: 'pending' },
    nextAttemptAt: { name: 'next_attempt_at', type: 'timestamptz', default: () => 'now()' },
    messageId: { name: 'message_id', type: 'text', nullable: true },
    deadAt: { name: 'dead_at', type: 'timestamptz', nullable: true },
    retriedAt: { name: 'retried_at', type: 'timestamptz', nullable: true },
  },
});
