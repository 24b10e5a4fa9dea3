// Outstanding AuthnRequest ids are kept for this long (the identity provider must answer within it); older rows are
// pruned on every insert and by the periodic housekeeping.
export const SAML_REQUEST_TTL_MS = 10 * 60 * 1000;

type Queryable = { query: (sql: string, params?: unknown[]) => Promise<unknown> };

/** Deletes expired SAML request ids; returns how many. */
export async function pruneSamlRequests(q: Queryable, ttlMs = SAML_REQUEST_TTL_MS): Promise<number> {
  const rows = (await q.query(
    `WITH d AS (DELETE FROM saml_request WHERE created_at < now() - ($1 || ' milliseconds')::interval RETURNING 1) SELECT count(*)::int AS n FROM d`,
    [String(ttlMs)],
  )) as { n: number }[];
  return rows[0].n;
}
