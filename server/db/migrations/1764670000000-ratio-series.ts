import type { MigrationInterface, QueryRunner } from 'typeorm';

// Uploaded frequency-ratio series: one row per file, its raw bytes in 1 MiB parts (inside the database, so the file
// and its rows commit or vanish together) and one row per sample.
export class RatioSeries1764670000000 implements MigrationInterface {
  name = 'RatioSeries1764670000000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      CREATE TABLE ratio_series (
        id uuid PRIMARY KEY,
        campaign_id uuid NOT NULL REFERENCES campaign(id),
        file_name text NOT NULL,
        sha256 text NOT NULL CHECK (sha256 ~ '^[0-9a-f]{64}$'),
        byte_size bigint NOT NULL CHECK (byte_size > 0),
        row_count int NOT NULL CHECK (row_count > 0),
        valid_count int NOT NULL CHECK (valid_count >= 0 AND valid_count <= row_count),
        first_mjd float8 NOT NULL,
        last_mjd float8 NOT NULL CHECK (last_mjd >= first_mjd),
        uptime_fraction float8 NOT NULL CHECK (uptime_fraction >= 0 AND uptime_fraction <= 1),
        tau0_seconds float8 NOT NULL CHECK (tau0_seconds >= 0),
        mapping jsonb NOT NULL,
        -- block summaries for plots (float64 little-endian: first mjd, last mjd, min y, max y, valid count per block)
        overview bytea NOT NULL,
        invented boolean NOT NULL DEFAULT false,
        created_by_user_id uuid,
        created_by text NOT NULL,
        created_at timestamptz NOT NULL DEFAULT now(),
        CONSTRAINT ratio_series_same_file_once UNIQUE (campaign_id, sha256)
      );
      CREATE INDEX ratio_series_campaign ON ratio_series(campaign_id, created_at);

      -- The raw file as uploaded, in parts of 1 MiB; stored uncompressed (EXTERNAL): CSV compresses, but pglz over
      -- tens of megabytes would cost more upload time than the disk it saves.
      CREATE TABLE ratio_series_file (
        series_id uuid NOT NULL REFERENCES ratio_series(id) ON DELETE CASCADE,
        part int NOT NULL,
        bytes bytea NOT NULL,
        PRIMARY KEY (series_id, part)
      );
      ALTER TABLE ratio_series_file ALTER COLUMN bytes SET STORAGE EXTERNAL;

      -- Samples arrive by COPY before their series row exists (its statistics are known only at the end of the
      -- file), all in one transaction. No foreign key and no B-tree: a per-row referential check and index insert
      -- cost seconds per million rows. Epochs increase strictly within a series (checked on upload) and rows of one
      -- series are appended together, so a BRIN index finds them; the trigger below removes them with their series.
      CREATE TABLE ratio_sample (
        series_id uuid NOT NULL,
        mjd float8 NOT NULL,
        y float8 NOT NULL,
        valid boolean NOT NULL
      );
      CREATE INDEX ratio_sample_series ON ratio_sample USING brin (series_id, mjd) WITH (pages_per_range = 16);

      CREATE FUNCTION ratio_series_drop_samples() RETURNS trigger LANGUAGE plpgsql AS $$
      BEGIN
        DELETE FROM ratio_sample WHERE series_id = OLD.id;
        RETURN OLD;
      END $$;
      CREATE TRIGGER ratio_series_samples_gone AFTER DELETE ON ratio_series
        FOR EACH ROW EXECUTE FUNCTION ratio_series_drop_samples();
    `);
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query(`
      DROP TABLE ratio_sample;
      DROP TABLE ratio_series_file;
      DROP TRIGGER ratio_series_samples_gone ON ratio_series;
      DROP FUNCTION ratio_series_drop_samples();
      DROP TABLE ratio_series;
    `);
  }
}
