import type { MigrationInterface, QueryRunner } from 'typeorm';

// The review desk: the reviewer's checklist, who accepted a campaign and why (comment, justification of
// exceptions such as an Eₙ that does not agree or a low uptime), so certification can check the four-eyes rule.
export class ReviewDesk1765700000000 implements MigrationInterface {
  name = 'ReviewDesk1765700000000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      ALTER TABLE campaign
        ADD COLUMN review_checklist jsonb NOT NULL DEFAULT '{}'::jsonb,
        ADD COLUMN accepted_by_user_id uuid REFERENCES app_user(id),
        ADD COLUMN accepted_by text,
        ADD COLUMN accepted_at timestamptz,
        ADD COLUMN acceptance_comment text,
        ADD COLUMN acceptance_justification text,
        ADD COLUMN acceptance_exceptions jsonb NOT NULL DEFAULT '[]'::jsonb;
      -- Per plot block of a series: mean and sum of squared deviations of the valid y (float64 pairs), so a plot can
      -- draw ±1σ per bucket without reading the samples. NULL for series stored before; those plots read the samples.
      ALTER TABLE ratio_series ADD COLUMN overview_stats bytea;
    `);
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query(`
      ALTER TABLE campaign
        DROP COLUMN review_checklist, DROP COLUMN accepted_by_user_id, DROP COLUMN accepted_by, DROP COLUMN accepted_at,
        DROP COLUMN acceptance_comment, DROP COLUMN acceptance_justification, DROP COLUMN acceptance_exceptions;
      ALTER TABLE ratio_series DROP COLUMN overview_stats;
    `);
  }
}
