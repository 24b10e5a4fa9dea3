import type { MigrationInterface, QueryRunner } from 'typeorm';

// Comparison results: each computation is kept (history), with the SHA-256 of its inputs, the constants and the
// software version, so a certificate can name exactly what produced its numbers.
export class Results1764680000000 implements MigrationInterface {
  name = 'Results1764680000000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      CREATE TABLE comparison_result (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        campaign_id uuid NOT NULL REFERENCES campaign(id),
        input_hash text NOT NULL CHECK (input_hash ~ '^[0-9a-f]{64}$'),
        constants jsonb NOT NULL,
        software_version text NOT NULL,
        computed_at timestamptz NOT NULL,
        computed_by text NOT NULL,
        result jsonb NOT NULL
      );
      CREATE INDEX comparison_result_campaign ON comparison_result(campaign_id, computed_at DESC);
    `);
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query('DROP TABLE comparison_result;');
  }
}
