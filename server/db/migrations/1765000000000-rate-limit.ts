import type { MigrationInterface, QueryRunner } from 'typeorm';

// Request counters shared by every process (server/http/rate-limit.ts, rate-limiter-flexible's PostgreSQL store).
// The table is made here rather than by the library at start, so the application needs no CREATE right.
// Columns as the library reads and writes them: key "<limiter>:<caller>", points used, expiry in ms since 1970.
export class RateLimit1765000000000 implements MigrationInterface {
  name = 'RateLimit1765000000000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      CREATE TABLE rate_limit (
        key varchar(255) PRIMARY KEY,
        points integer NOT NULL DEFAULT 0,
        expire bigint
      );
      CREATE INDEX rate_limit_expire ON rate_limit (expire);
    `);
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query('DROP TABLE rate_limit');
  }
}
