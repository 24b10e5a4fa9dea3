import pino from 'pino';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it, onTestFinished } from 'vitest';
import { startFakeSmtp, type FakeSmtp } from '../../server/dev/fake-smtp';
import { createMailSender, enqueueMail, type MailSender } from '../../server/mail/outbox';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';

// The outbox against a mail server that goes away: nothing is lost, nothing is sent twice. A private test mailbox
// per file, so taking it down does not disturb other test files; the backoff runs on a compressed time base
// (base 200 ms, cap 2 s instead of the production 30 s and 1 h) so a 60 s outage needs no hours of waiting.

const logger = pino({ level: 'silent' });
const retry = { baseMs: 200, capMs: 2000, giveUpAfterMs: 60 * 60_000 };
let t: TestApp;
let smtp: FakeSmtp;
const senders: MailSender[] = [];
beforeAll(async () => {
  t = await createTestApp({ seed: false });
  smtp = await startFakeSmtp({ smtpPort: 0, httpPort: 0 });
});
afterAll(async () => {
  for (const s of senders) s.stop();
  await smtp.close();
  await t.close();
});

function sender(opts: Partial<typeof retry> = {}): MailSender {
  const s = createMailSender({ dataSource: t.ds, smtpUrl: smtp.smtpUrl, from: t.config.mailFrom, logger, retry: { ...retry, ...opts } });
  senders.push(s);
  return s;
}

async function enqueue(tag: string, n: number): Promise<string[]> {
  const subjects = Array.from({ length: n }, (_, i) => `${tag} ${i + 1}`);
  await t.ds.transaction(async (m) => {
    for (const subject of subjects) await enqueueMail(m, { to: 'review-desk@geopotential-office.invalid', subject, text: `body of ${subject}` });
  });
  return subjects;
}

const caught = (subjects: string[]) => smtp.messages.filter((m) => subjects.includes(m.subject));

async function until(what: string, cond: () => boolean | Promise<boolean>, timeoutMs: number): Promise<void> {
  const end = Date.now() + timeoutMs;
  while (!(await cond())) {
    if (Date.now() > end) throw new Error(`timed out waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 100));
  }
}

describe('mail outbox', () => {
  it('keeps retrying through a 60 s outage and delivers every message exactly once when the server returns', async () => {
    await smtp.down();
    const subjects = await enqueue('outage', 5);
    const s = sender();
    s.start(100);
    try {
      await new Promise((r) => setTimeout(r, 60_000));
      expect(caught(subjects)).toHaveLength(0);
      const during: { attempts: number; sent_at: Date | null }[] = await t.ds.query(`SELECT attempts, sent_at FROM mail_outbox WHERE subject = ANY($1)`, [subjects]);
      // more tries than the old limit of 10 (2 s apart), and none given up
      expect(during.map((r) => r.attempts > 10 && r.sent_at === null)).toEqual([true, true, true, true, true]);
    } finally {
      await smtp.up();
    }
    await until('all five delivered', () => caught(subjects).length >= 5, 20_000);
    await new Promise((r) => setTimeout(r, 1000));
    const got = caught(subjects);
    expect(got.map((m) => m.subject).sort()).toEqual([...subjects].sort());
    expect(new Set(got.map((m) => m.messageId)).size).toBe(5);
    const rows: { state: string; sent_at: Date | null }[] = await t.ds.query(`SELECT state, sent_at FROM mail_outbox WHERE subject = ANY($1)`, [subjects]);
    expect(rows.every((r) => r.state === 'sent' && r.sent_at)).toBe(true);
    s.stop();
  }, 120_000);

  it('two senders flushing the same outbox at once send each message once, with a Message-ID fixed per row', async () => {
    const subjects = await enqueue('concurrent', 30);
    const a = sender();
    const b = sender();
    await Promise.all([a.flush(), b.flush(), a.flush(), b.flush()]);
    await Promise.all([a.flush(), b.flush()]);
    const got = caught(subjects);
    expect(got).toHaveLength(30);
    expect(new Set(got.map((m) => m.subject)).size).toBe(30);
    const rows: { id: string; message_id: string }[] = await t.ds.query(`SELECT id, message_id FROM mail_outbox WHERE subject = ANY($1)`, [subjects]);
    const byId = new Map(rows.map((r) => [r.message_id, r.id]));
    for (const m of got) expect(byId.has(m.messageId.replace(/^<|>$/g, ''))).toBe(true);
  });

  it('gives up only after the configured time, into a dead-letter state the administrator sees and can retry', async () => {
    await smtp.down();
    onTestFinished(() => smtp.up());
    const [subject] = await enqueue('dead letter', 1);
    const s = sender({ giveUpAfterMs: 1500 });
    await until('the message to go dead', async () => {
      await s.flush();
      const [r] = await t.ds.query(`SELECT state FROM mail_outbox WHERE subject = $1`, [subject]);
      return r.state === 'dead';
    }, 15_000);
    const [row] = await t.ds.query(`SELECT id, attempts, last_error FROM mail_outbox WHERE subject = $1`, [subject]);
    expect(row.attempts).toBeGreaterThan(0);
    expect(row.last_error).toBeTruthy();

    const admin = await tokenFor(t, 'yusra.holm@geopotential-office.invalid');
    const operator = await tokenFor(t, 'ines.varga@saltmarsh-lab.invalid');
    expect((await request(t.app).get('/api/v1/admin/mail-outbox?state=dead').set('authorization', `Bearer ${operator}`)).status).toBe(403);
    const list = await request(t.app).get('/api/v1/admin/mail-outbox?state=dead').set('authorization', `Bearer ${admin}`);
    expect(list.status).toBe(200);
    const item = list.body.items.find((i: { id: string }) => i.id === row.id);
    expect(item).toMatchObject({ state: 'dead', subject, attempts: row.attempts });
    expect(item.lastError).toBeTruthy();
    expect(list.body.counts.dead).toBeGreaterThanOrEqual(1);

    await smtp.up();
    const retried = await request(t.app).post(`/api/v1/admin/mail-outbox/${row.id}/retry`).set('authorization', `Bearer ${admin}`).send({});
    expect(retried.status).toBe(200);
    expect(retried.body.state).toBe('pending');
    const [audit] = await t.ds.query(`SELECT actor_label FROM audit_event WHERE action = 'mail.retried' AND entity_id = $1`, [row.id]);
    expect(audit).toBeDefined();
    await s.flush();
    expect(caught([subject])).toHaveLength(1);
    const [after] = await t.ds.query(`SELECT state FROM mail_outbox WHERE id = $1`, [row.id]);
    expect(after.state).toBe('sent');
    // a message that is not dead cannot be "retried" into a second delivery
    expect((await request(t.app).post(`/api/v1/admin/mail-outbox/${row.id}/retry`).set('authorization', `Bearer ${admin}`).send({})).status).toBe(409);
  }, 30_000);
});
