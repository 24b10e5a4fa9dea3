import type { MigrationInterface, QueryRunner } from 'typeorm';

// Mail outbox: an explicit state (pending → sent, or dead after the give-up time), the time of the next try
// (exponential backoff with jitter), a Message-ID fixed per row, and the time an administrator last retried it.
// Messages the old sender had abandoned after 10 tries go back to pending: nothing is dropped.
export class MailOutboxRetry1765310000000 implements MigrationInterface {
  name = 'MailOutboxRetry1765310000000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      ALTER TABLE mail_outbox
        ADD COLUMN state text NOT NULL DEFAULT 'pending' CHECK (state IN ('pending', 'sent', 'dead')),
        ADD COLUMN next_attempt_at timestamptz NOT NULL DEFAULT now(),
        ADD COLUMN message_id text UNIQUE,
        ADD COLUMN dead_at timestamptz,
        ADD COLUMN retried_at timestamptz;
      UPDATE mail_outbox SET state = 'sent' WHERE sent_at IS NOT NULL;
      CREATE INDEX mail_outbox_due ON mail_outbox(next_attempt_at) WHERE state = 'pending';
      CREATE INDEX mail_outbox_state ON mail_outbox(state, created_at);
    `);
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query(`
      DROP INDEX mail_outbox_state; DROP INDEX mail_outbox_due;
      ALTER TABLE mail_outbox DROP COLUMN retried_at, DROP COLUMN dead_at, DROP COLUMN message_id, DROP COLUMN next_attempt_at, DROP COLUMN state;
    `);
  }
}
