import type { MigrationInterface, QueryRunner } from 'typeorm';

// Result computation runs as a job (queue 'result-compute'). One row per campaign says what was last asked for and
// how far it got, so reading a result (a GET) can tell "being computed" from "not computed" without writing anything.
// `job_id` is the newest job: a job that finds another id here was overtaken and leaves the row alone.
export class ResultRequests1765000000001 implements MigrationInterface {
  name = 'ResultRequests1765000000001';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      CREATE TABLE result_request (
        campaign_id uuid PRIMARY KEY REFERENCES campaign(id),
        job_id uuid,
        reason text NOT NULL CHECK (reason IN ('upload', 'accept', 'recompute')),
        state text NOT NULL CHECK (state IN ('queued', 'running', 'done', 'failed')),
        requested_by uuid REFERENCES app_user(id),
        requested_at timestamptz NOT NULL DEFAULT now(),
        started_at timestamptz,
        finished_at timestamptz,
        result_id uuid,
        error text
      );
    `);
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query('DROP TABLE result_request');
  }
}
