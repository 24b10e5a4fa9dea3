import type { Role } from '../../shared/auth';

/** Who is calling: resolved once per request from the session or the API token. */
export type Actor = {
  userId: string;
  email: string;
  displayName: string;
  role: Role;
  instituteId: string | null;
  via: 'session' | 'token';
};

export function actorLabel(actor: Actor | null): string {
  return actor ? `${actor.displayName} <${actor.email}> (${actor.role})` : 'system';
}
