import type { EntityManager } from 'typeorm';
import { type Actor, actorLabel } from '../auth/actor';
import { AuditEventEntity, type AuditEventRow } from '../db/entities/core.entities';

export type AuditInput = {
  action: string;
  entityType: string;
  entityId?: string | null;
  instituteId?: string | null;
  details?: Record<string, unknown>;
  /** Only for the demo seed's invented history; real events take the database's now(). */
  at?: Date;
};

/** Appends one event to the hash-chained audit trail, inside the caller's transaction. */
export async function recordAudit(manager: EntityManager, actor: Actor | null, input: AuditInput): Promise<void> {
  await manager.getRepository(AuditEventEntity).insert({
    actorUserId: actor?.userId ?? null,
    actorLabel: actorLabel(actor),
    action: input.action,
    entityType: input.entityType,
    entityId: input.entityId ?? null,
    instituteId: input.instituteId ?? null,
    details: (input.details ?? {}) as never,
    ...(input.at ? { at: input.at } : {}),
  });
}

export function toAuditEventDto(row: AuditEventRow) {
  return {
    id: String(row.id),
    at: row.at.toISOString(),
    actorLabel: row.actorLabel,
    action: row.action,
    entityType: row.entityType,
    entityId: row.entityId,
    details: row.details,
    hash: row.hash,
  };
}
