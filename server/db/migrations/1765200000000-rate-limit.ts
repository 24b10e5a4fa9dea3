import type { MigrationInterface, QueryRunner } from 'typeorm';

// An index that lets expired SAML request ids be pruned (the rate-limit counters' table comes from an earlier
// migration, 1765000000000-rate-limit).
export class RateLimit1765200000000 implements MigrationInterface {
  name = 'RateLimit1765200000000';

  async up(q: QueryRunner): Promise<void> {
    await q.query('CREATE INDEX saml_request_created_at_idx ON saml_request (created_at)');
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query('DROP INDEX saml_request_created_at_idx');
  }
}
