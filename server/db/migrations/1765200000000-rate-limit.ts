import type { MigrationInterface, QueryRunner } from 'typeorm';

// Shared request counters for rate limiting (the layout rate-limiter-flexible's PostgreSQL store expects), so
// every HTTP process counts against the same limits; and an index that lets expired SAML request ids be pruned.
export class RateLimit1765200000000 implements MigrationInterface {
  name = 'RateLimit1765200000000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      CREATE TABLE rate_limit (
        key varchar(255) PRIMARY KEY,
        points integer NOT NULL DEFAULT 0,
        -- end of the counting window, ms since 1970 (the store's own representation)
        expire bigint
      );
      CREATE INDEX rate_limit_expire_idx ON rate_limit (expire);
      CREATE INDEX saml_request_created_at_idx ON saml_request (created_at);
    `);
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query('DROP INDEX saml_request_created_at_idx; DROP TABLE rate_limit;');
  }
}
