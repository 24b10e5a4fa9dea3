import type { MigrationInterface, QueryRunner } from 'typeorm';

// Upload progress shared by every HTTP process: one row per upload in flight (advisory, removed after 10 minutes).
export class UploadProgress1765800002000 implements MigrationInterface {
  name = 'UploadProgress1765800002000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      CREATE TABLE upload_progress (
        upload_id uuid PRIMARY KEY,
        user_id uuid NOT NULL,
        phase text NOT NULL CHECK (phase IN ('receiving','storing','done','failed')),
        bytes_read bigint NOT NULL DEFAULT 0,
        bytes_expected bigint,
        rows_processed bigint NOT NULL DEFAULT 0,
        series_id uuid,
        updated_at timestamptz NOT NULL DEFAULT now()
      );
      CREATE INDEX upload_progress_updated ON upload_progress(updated_at);
    `);
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query('DROP TABLE upload_progress');
  }
}
