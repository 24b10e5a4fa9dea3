import type { MigrationInterface, QueryRunner } from 'typeorm';

// Accounts and sessions: an administrator can deactivate a person; API tokens expire (at most a year after
// creation); sessions are indexed by the person they belong to so they can be listed and ended.
export class SessionsAccounts1765100000000 implements MigrationInterface {
  name = 'SessionsAccounts1765100000000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      ALTER TABLE app_user ADD COLUMN deactivated_at timestamptz;

      ALTER TABLE api_token ADD COLUMN expires_at timestamptz;
      UPDATE api_token SET expires_at = LEAST(now() + interval '90 days', created_at + interval '365 days');
      ALTER TABLE api_token ALTER COLUMN expires_at SET NOT NULL;
      ALTER TABLE api_token ADD CONSTRAINT api_token_expiry_within_a_year
        CHECK (expires_at > created_at AND expires_at <= created_at + interval '365 days 1 minute');

      CREATE INDEX session_by_person ON "session" ((sess -> 'passport' ->> 'user'));
    `);
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query(`
      DROP INDEX session_by_person;
      ALTER TABLE api_token DROP CONSTRAINT api_token_expiry_within_a_year;
      ALTER TABLE api_token DROP COLUMN expires_at;
      ALTER TABLE app_user DROP COLUMN deactivated_at;
    `);
  }
}
