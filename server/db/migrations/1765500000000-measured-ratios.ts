import type { MigrationInterface, QueryRunner } from 'typeorm';

// Directly measured optical frequency ratios as reference data: value as published (text, all digits), relative
// standard uncertainty, publication. Campaigns copy what they use, so an entry is never changed in place.
export class MeasuredRatios1765500000000 implements MigrationInterface {
  name = 'MeasuredRatios1765500000000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      CREATE TABLE measured_frequency_ratio (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        numerator_species text NOT NULL,
        denominator_species text NOT NULL CHECK (denominator_species <> numerator_species),
        value text NOT NULL,
        relative_uncertainty float8 NOT NULL CHECK (relative_uncertainty > 0 AND relative_uncertainty < 1e-6),
        source text NOT NULL CHECK (length(source) >= 10),
        created_at timestamptz NOT NULL DEFAULT now()
      );
      CREATE INDEX measured_frequency_ratio_pair ON measured_frequency_ratio (numerator_species, denominator_species);
    `);
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query('DROP TABLE measured_frequency_ratio');
  }
}
