import { idParamsSchema } from '../../shared/http';
import { mailOutboxItemSchema, mailOutboxPageSchema, mailOutboxQuerySchema } from '../../shared/mail-outbox';
import { recordAudit } from '../audit/audit.service';
import { authorize } from '../auth/permissions';
import { MailOutboxEntity, type MailOutboxRow } from '../db/entities/core.entities';
import { Conflict, NotFound } from '../http/errors';
import { route } from '../http/route';

function toItem(r: MailOutboxRow) {
  return {
    id: r.id, state: r.state, to: r.toAddress, subject: r.subject, createdAt: r.createdAt.toISOString(), attempts: r.attempts,
    lastError: r.lastError, nextAttemptAt: r.state === 'pending' ? r.nextAttemptAt.toISOString() : null,
    sentAt: r.sentAt?.toISOString() ?? null, deadAt: r.deadAt?.toISOString() ?? null, messageId: r.messageId,
  };
}

export const mailOutboxRoutes = [
  route({
    method: 'get', path: '/api/v1/admin/mail-outbox', summary: 'Outgoing mail by state (dead letters first by default)', tag: 'admin', permission: 'users:write',
    query: mailOutboxQuerySchema, response: mailOutboxPageSchema,
    handler: async ({ actor, query, deps }) => {
      authorize(actor, 'users:write');
      const repo = deps.dataSource.getRepository(MailOutboxEntity);
      const [rows, total] = await repo.findAndCount({
        where: { state: query.state }, order: { createdAt: 'DESC' }, skip: (query.page - 1) * query.pageSize, take: query.pageSize,
      });
      const counted: { state: 'pending' | 'sent' | 'dead'; n: number }[] = await deps.dataSource.query(`SELECT state, count(*)::int AS n FROM mail_outbox GROUP BY state`);
      const counts = { pending: 0, sent: 0, dead: 0 };
      for (const c of counted) if (Object.hasOwn(counts, c.state)) counts[c.state] = c.n;
      return { items: rows.map(toItem), total, page: query.page, pageSize: query.pageSize, counts };
    },
  }),
  route({
    method: 'post', path: '/api/v1/admin/mail-outbox/:id/retry', summary: 'Send a dead letter again (the give-up clock restarts)', tag: 'admin', permission: 'users:write',
    params: idParamsSchema, response: mailOutboxItemSchema,
    handler: async ({ actor, params, deps }) => {
      authorize(actor, 'users:write');
      return deps.dataSource.transaction(async (m) => {
        const repo = m.getRepository(MailOutboxEntity);
        const row = await repo.createQueryBuilder('o').setLock('pessimistic_write').where('o.id = :id', { id: params.id }).getOne();
        if (!row) throw new NotFound('Outgoing message');
        if (row.state !== 'dead') throw new Conflict(`This message is ${row.state}; only a dead letter can be retried.`, { state: row.state });
        await m.query(`UPDATE mail_outbox SET state = 'pending', next_attempt_at = now(), retried_at = now(), dead_at = NULL WHERE id = $1`, [row.id]);
        await recordAudit(m, actor, { action: 'mail.retried', entityType: 'mail_outbox', entityId: row.id, details: { to: row.toAddress, subject: row.subject, attempts: row.attempts } });
        return toItem((await repo.findOneByOrFail({ id: row.id })));
      });
    },
  }),
];
