import nodemailer from 'nodemailer';
import type { DataSource, EntityManager } from 'typeorm';
import type { Logger } from 'pino';
import { MailOutboxEntity } from '../db/entities/core.entities';

export type OutgoingMail = { to: string; subject: string; text: string };

/** Queues a message in the same transaction as the event that causes it (transactional outbox). */
export async function enqueueMail(manager: EntityManager, mail: OutgoingMail): Promise<void> {
  await manager.getRepository(MailOutboxEntity).insert({ toAddress: mail.to, subject: mail.subject, textBody: mail.text });
}

export type MailSender = { flush: () => Promise<number>; start: (intervalMs?: number) => void; stop: () => void };

/** Sends queued messages through SMTP; failed sends stay queued and are retried on the next round. */
export function createMailSender(opts: { dataSource: DataSource; smtpUrl: string; from: string; logger: Logger }): MailSender {
  const transport = nodemailer.createTransport(opts.smtpUrl);
  let timer: NodeJS.Timeout | null = null;
  let running: Promise<number> | null = null;

  async function sendPending(): Promise<number> {
    const repo = opts.dataSource.getRepository(MailOutboxEntity);
    const pending = await repo
      .createQueryBuilder('m')
      .where('m.sent_at IS NULL AND m.attempts < 10')
      .orderBy('m.created_at', 'ASC')
      .limit(50)
      .getMany();
    let sent = 0;
    for (const m of pending) {
      try {
        await transport.sendMail({ from: opts.from, to: m.toAddress, subject: m.subject, text: m.textBody });
        await repo.update({ id: m.id }, { sentAt: new Date(), attempts: m.attempts + 1, lastError: null });
        sent++;
      } catch (e) {
        await repo.update({ id: m.id }, { attempts: m.attempts + 1, lastError: (e as Error).message });
        opts.logger.warn({ err: e, to: m.toAddress }, 'mail not sent; will retry');
      }
    }
    return sent;
  }

  const flush = () => {
    running ??= sendPending().finally(() => (running = null));
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
