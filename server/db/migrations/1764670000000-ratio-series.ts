import type { MigrationInterface, QueryRunner } from 'typeorm';

// Uploaded frequency-ratio series: one row per file (raw bytes kept as a PostgreSQL large object, so the file and
// its rows commit or vanish together) and one row per sample. Epochs increase strictly, so (series, mjd) is the key.
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
        raw_file_oid oid NOT NULL,
        -- block summaries for plots (float64 little-endian: first mjd, last mjd, min y, max y, valid count per block)
        overview bytea NOT NULL,
        invented boolean NOT NULL DEFAULT false,
        created_by_user_id uuid,
        created_by text NOT NULL,
        created_at timestamptz NOT NULL DEFAULT now(),
        CONSTRAINT ratio_series_same_file_once UNIQUE (campaign_id, sha256)
      );
      CREATE INDEX ratio_series_campaign ON ratio_series(campaign_id, created_at);

      -- Samples are written by COPY in the same transaction as their series row, before it (the statistics are known
      -- only at the end of the file). No foreign key: a per-row referential check costs seconds per million rows;
      -- the upload transaction guarantees the pairing and the trigger below removes samples with their series.
      CREATE TABLE ratio_sample (
        series_id uuid NOT NULL,
        mjd float8 NOT NULL,
        y float8 NOT NULL,
        valid boolean NOT NULL,
        PRIMARY KEY (series_id, mjd)
      );

      CREATE FUNCTION ratio_series_drop_raw_file() RETURNS trigger LANGUAGE plpgsql AS $$
      BEGIN
        PERFORM lo_unlink(OLD.raw_file_oid);
        DELETE FROM ratio_sample WHERE series_id = OLD.id;
        RETURN OLD;
      END $$;
      CREATE TRIGGER ratio_series_raw_file_gone AFTER DELETE ON ratio_series
        FOR EACH ROW EXECUTE FUNCTION ratio_series_drop_raw_file();
    `);
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query(`
      DROP TABLE ratio_sample;
      DROP TRIGGER ratio_series_raw_file_gone ON ratio_series;
      DROP FUNCTION ratio_series_drop_raw_file();
      DROP TABLE ratio_series;
    `);
  }
}
