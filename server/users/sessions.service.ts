import type { DataSource } from 'typeorm';
import { recordAudit } from '../audit/audit.service';
import type { Actor } from '../auth/actor';
import { authorize } from '../auth/permissions';
import { NotFound } from '../http/errors';

// Browser sessions live in the "session" table (connect-pg-simple). Administrators list and end them; the
// listing names a session by the SHA-256 of its id, never by the id itself (which is the cookie's secret).
type Row = { id: string; user_id: string; email: string; display_name: string; signed_in_at: string | null; expire_ms: string };

export function createSessionsService(dataSource: DataSource) {
  return {
    async list(actor: Actor, q: { page: number; pageSize: number; userId?: string }) {
      authorize(actor, 'users:read');
      const from = (userParam: string) =>
        `FROM "session" s JOIN app_user u ON u.id::text = s.sess -> 'passport' ->> 'user' WHERE s.expire > now()${q.userId ? ` AND u.id = ${userParam}` : ''}`;
      const byUser = q.userId ? [q.userId] : [];
      const rows: Row[] = await dataSource.query(
        `SELECT encode(sha256(convert_to(s.sid, 'UTF8')), 'hex') AS id, u.id AS user_id, u.email, u.display_name,
                s.sess ->> 'signedInAt' AS signed_in_at,
                (extract(epoch FROM s.expire::timestamptz) * 1000)::bigint::text AS expire_ms
         ${from('$3')} ORDER BY s.expire DESC LIMIT $1 OFFSET $2`,
        [q.pageSize, (q.page - 1) * q.pageSize, ...byUser],
      );
      const [{ n }]: { n: string }[] = await dataSource.query(`SELECT count(*)::text AS n ${from('$1')}`, byUser);
      return {
        items: rows.map((r) => ({
          id: r.id,
          person: { id: r.user_id, email: r.email, displayName: r.display_name },
          signedInAt: r.signed_in_at ? new Date(Number(r.signed_in_at)).toISOString() : null,
          // the store writes to_timestamp(…) into a timestamp without time zone, so it reads back in the session's zone
          expiresAt: new Date(Number(r.expire_ms)).toISOString(),
        })),
        total: Number(n),
        page: q.page,
        pageSize: q.pageSize,
      };
    },
    async end(actor: Actor, id: string) {
      authorize(actor, 'users:write');
      await dataSource.transaction(async (m) => {
        // TypeORM answers a DELETE … RETURNING with [rows, count], not with the rows alone.
        const [rows]: [{ user_id: string | null }[], number] = await m.query(
          `DELETE FROM "session" WHERE encode(sha256(convert_to(sid, 'UTF8')), 'hex') = $1 RETURNING sess -> 'passport' ->> 'user' AS user_id`,
          [id],
        );
        if (!rows.length) throw new NotFound('Session');
        await recordAudit(m, actor, { action: 'session.ended', entityType: 'user', entityId: rows[0].user_id, details: { session: id.slice(0, 12) } });
      });
    },
  };
}
