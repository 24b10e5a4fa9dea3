import type { MigrationInterface, QueryRunner } from 'typeorm';

// Clock-ratio closures: one row per loop of campaigns that ran at the same time (found and computed by the
// 'closure-compute' job), with the campaigns of the loop in order and the sign each enters with. The loop key
// (sorted campaign ids) identifies a loop; input_hash says which inputs the stored closure was computed from.
export class RatioClosures1766030000000 implements MigrationInterface {
  name = 'RatioClosures1766030000000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      CREATE TABLE ratio_closure (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        loop_key text NOT NULL UNIQUE,
        input_hash text NOT NULL,
        label text NOT NULL,
        common_start timestamptz NOT NULL,
        common_end timestamptz NOT NULL,
        closure double precision NOT NULL,
        standard_uncertainty double precision NOT NULL,
        expanded_uncertainty double precision NOT NULL,
        coverage_factor double precision NOT NULL,
        en double precision NOT NULL,
        agreed boolean NOT NULL,
        computed_at timestamptz NOT NULL,
        software_version text NOT NULL,
        body jsonb NOT NULL
      );
      CREATE TABLE ratio_closure_campaign (
        closure_id uuid NOT NULL REFERENCES ratio_closure(id) ON DELETE CASCADE,
        campaign_id uuid NOT NULL REFERENCES campaign(id),
        position integer NOT NULL,
        sign smallint NOT NULL CHECK (sign IN (-1, 1)),
        PRIMARY KEY (closure_id, campaign_id)
      );
      CREATE INDEX ratio_closure_campaign_campaign ON ratio_closure_campaign (campaign_id);
    `);
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query('DROP TABLE ratio_closure_campaign; DROP TABLE ratio_closure');
  }
}
