import type { MigrationInterface, QueryRunner } from 'typeorm';

// Durable progress of long work done by workers, and certificate issue as a job.
// job_progress: one row per (kind, subject) — the stage a job reached and how far (0..1), written by the worker
// outside the job's own transaction so any HTTP process can read it while the job runs.
// certificate_request: an issue or reissue asked for over HTTP (checked there: comment, justification, four-eyes)
// and carried out by the 'certificate-issue' job. The worker locks the row, issues and marks it done in one
// transaction, so a retried job after a killed worker finishes the request exactly once. One open request per
// campaign (partial unique index): asking again while one is open answers with that one.
export class JobsProgress1766080000000 implements MigrationInterface {
  name = 'JobsProgress1766080000000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      CREATE TABLE job_progress (
        kind text NOT NULL CHECK (kind IN ('result-compute', 'certificate-issue', 'adjustment-run')),
        subject_id uuid NOT NULL,
        stage text NOT NULL,
        fraction double precision NOT NULL DEFAULT 0 CHECK (fraction >= 0 AND fraction <= 1),
        updated_at timestamptz NOT NULL DEFAULT now(),
        error text,
        PRIMARY KEY (kind, subject_id)
      );
      CREATE TABLE certificate_request (
        id uuid PRIMARY KEY,
        kind text NOT NULL CHECK (kind IN ('issue', 'reissue')),
        campaign_id uuid NOT NULL REFERENCES campaign(id),
        previous_number text,
        comment text NOT NULL,
        justification text,
        requested_by uuid NOT NULL REFERENCES app_user(id),
        requested_at timestamptz NOT NULL DEFAULT now(),
        state text NOT NULL CHECK (state IN ('queued', 'running', 'done', 'failed')),
        job_id uuid,
        started_at timestamptz,
        finished_at timestamptz,
        certificate_id uuid REFERENCES certificate(id),
        created boolean,
        error text
      );
      CREATE UNIQUE INDEX certificate_request_one_open ON certificate_request (campaign_id) WHERE state IN ('queued', 'running');
      CREATE INDEX certificate_request_campaign ON certificate_request (campaign_id, requested_at DESC);
    `);
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query('DROP TABLE certificate_request; DROP TABLE job_progress');
  }
}
