import type { Role } from '../../shared/auth';
import { Forbidden, Unauthenticated } from '../http/errors';
import type { Actor } from './actor';

const everyone: readonly Role[] = ['operator', 'coordinator', 'auditor', 'admin'];

/**
 * The role × permission table. Every route names one permission; services call `authorize` with it
 * and then apply institute scoping. Auditors never hold a write permission.
 */
export const permissionTable = {
  'me:read': everyone,
  'tokens:own': everyone, // every person may hold personal API tokens for scripts (reading included)
  'institutes:read': everyone,
  'institutes:write': ['admin'],
  'users:read': ['admin'],
  'users:write': ['admin'],
  'mailbox:read': ['admin'],
  'audit:read': ['coordinator', 'auditor', 'admin'],
  'calc:use': everyone,
  'registry:read': everyone,
  'registry:write': ['operator', 'coordinator'],
  'campaigns:read': everyone,
  'campaigns:write': ['operator'],
  'campaigns:review': ['coordinator'],
  // Calibration chains: the coordinator, and operators of the transportable clock's institute (checked by the service).
  'chains:write': ['operator', 'coordinator'],
  'references:write': ['coordinator'],
  'network:read': everyone,
  'network:write': ['coordinator'],
  'certificates:read': everyone,
  'results:recompute': ['operator', 'coordinator'],
  'certificates:issue': ['coordinator'],
  'signing-keys:revoke': ['admin'],
} as const satisfies Record<string, readonly Role[]>;

export type Permission = keyof typeof permissionTable;

export function can(actor: Actor, permission: Permission): boolean {
  return (permissionTable[permission] as readonly Role[]).includes(actor.role);
}

export function authorize(actor: Actor | null | undefined, permission: Permission): Actor {
  if (!actor) throw new Unauthenticated();
  if (!can(actor, permission)) throw new Forbidden(`The ${actor.role} role may not use '${permission}'.`);
  return actor;
}

/** Operators act only inside their own institute; other roles see across institutes. */
export function requireSameInstitute(actor: Actor, instituteId: string | null): void {
  if (actor.role === 'operator' && actor.instituteId !== instituteId) {
    throw new Forbidden('This record belongs to another institute.');
  }
}
