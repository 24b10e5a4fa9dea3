import nodemailer from 'nodemailer';
import type { DataSource, EntityManager } from 'typeorm';
import type { Logger } from 'pino';
import { MailOutboxEntity } from '../db/entities/core.entities';

export type OutgoingMail = { to: string; subject: string; text: string };

/** Queues a message in the same transaction as the event that causes it (transactional outbox). */
export async function enqueueMail(manager: EntityManager, mail: OutgoingMail): Promise<void> {
  await manager.getRepository(MailOutboxEntity).insert({ toAddress: mail.to, subject: mail.subject, textBody: mail.text });
}

/**
 * When to try again: exponential backoff, base·2^(attempt−1) capped, with "equal jitter" (half fixed, half random)
 * so senders that failed together do not retry together; a message is given up (dead letter, shown to the
 * administrator, never deleted) only once giveUpAfterMs have passed since it was queued or last retried by hand.
 */
export type RetryPolicy = { baseMs: number; capMs: number; giveUpAfterMs: number };
export const defaultRetryPolicy: RetryPolicy = { baseMs: 30_000, capMs: 60 * 60_000, giveUpAfterMs: 3 * 24 * 60 * 60_000 };

export function retryDelayMs(attempts: number, policy: RetryPolicy, random: () => number = Math.random): number {
  const ceiling = Math.min(policy.capMs, policy.baseMs * 2 ** Math.min(Math.max(attempts - 1, 0), 40));
  return Math.round(ceiling / 2 + (random() * ceiling) / 2);
}

export type MailSender = { flush: () => Promise<number>; start: (intervalMs?: number) => void; stop: () => void };

type DueRow = { id: string; to_address: string; subject: string; text_body: string; attempts: number; message_id: string | null; expired: boolean };

/**
 * Sends due messages through SMTP, one row at a time under a row lock (FOR UPDATE SKIP LOCKED): any number of
 * senders in any number of processes share the outbox and none sends a row another is sending or has sent. The
 * Message-ID is fixed per row, so the rare resend after a crash between SMTP acceptance and commit can be
 * recognised by the receiver as the same message.
 */
export function createMailSender(opts: { dataSource: DataSource; smtpUrl: string; from: string; logger: Logger; retry?: Partial<RetryPolicy> }): MailSender {
  const policy: RetryPolicy = { ...defaultRetryPolicy, ...opts.retry };
  const transport = nodemailer.createTransport(opts.smtpUrl, { connectionTimeout: 10_000, greetingTimeout: 10_000, socketTimeout: 30_000 } as never);
  const domain = /@([^>\s]+)>?\s*$/.exec(opts.from)?.[1] ?? 'chronolevel.invalid';
  let timer: NodeJS.Timeout | null = null;
  let running: Promise<number> | null = null;

  /** Tries one due message; null when none is due. */
  async function sendOne(): Promise<'sent' | 'failed' | null> {
    return opts.dataSource.transaction(async (m) => {
      const rows = (await m.query(
        `SELECT id, to_address, subject, text_body, attempts, message_id,
                now() - coalesce(retried_at, created_at) >= $1 * interval '1 millisecond' AS expired
           FROM mail_outbox WHERE state = 'pending' AND next_attempt_at <= now()
          ORDER BY next_attempt_at, created_at LIMIT 1 FOR UPDATE SKIP LOCKED`,
        [policy.giveUpAfterMs],
      )) as DueRow[];
      const row = rows[0];
      if (!row) return null;
      const messageId = row.message_id ?? `${row.id}@${domain}`;
      try {
        await transport.sendMail({ from: opts.from, to: row.to_address, subject: row.subject, text: row.text_body, messageId: `<${messageId}>` });
        await m.query(`UPDATE mail_outbox SET state = 'sent', sent_at = now(), attempts = attempts + 1, last_error = NULL, message_id = $2 WHERE id = $1`, [row.id, messageId]);
        return 'sent';
      } catch (e) {
        const error = (e as Error).message.slice(0, 1000);
        if (row.expired) {
          await m.query(`UPDATE mail_outbox SET state = 'dead', dead_at = now(), attempts = attempts + 1, last_error = $2, message_id = $3 WHERE id = $1`, [row.id, error, messageId]);
          opts.logger.error({ to: row.to_address, outboxId: row.id, attempts: row.attempts + 1 }, 'mail given up (dead letter); an administrator can retry it');
        } else {
          const delay = retryDelayMs(row.attempts + 1, policy);
          await m.query(`UPDATE mail_outbox SET attempts = attempts + 1, last_error = $2, message_id = $3, next_attempt_at = now() + $4 * interval '1 millisecond' WHERE id = $1`, [row.id, error, messageId, delay]);
          opts.logger.warn({ err: e, to: row.to_address, outboxId: row.id, retryInMs: delay }, 'mail not sent; will retry');
        }
      }
      return 'failed';
    });
  }

  /** Sends what is due (at most 200 tries per round); returns how many were sent. */
  async function sendDue(): Promise<number> {
    let sent = 0;
    for (let tries = 0; tries < 200; tries++) {
      const r = await sendOne();
      if (!r) break;
      if (r === 'sent') sent++;
    }
    return sent;
  }

  const flush = () => {
    running ??= sendDue().finally(() => (running = null));
    return running;
  };
  return {
    flush,
    start(intervalMs = 2000) {
      timer ??= setInterval(() => void flush().catch((e) => opts.logger.error({ err: e }, 'mail sender failed')), intervalMs);
    },
    stop() {
      if (timer) clearInterval(timer);
      timer = null;
      transport.close();
    },
  };
}
