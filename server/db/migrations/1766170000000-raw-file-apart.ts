import type { MigrationInterface, QueryRunner } from 'typeorm';

// The raw file of an upload is written on a connection of its own, alongside the samples' COPY, and committed just
// before the upload's transaction (server/uploads/raw-file-stream.ts). Its parts therefore arrive before their series
// row exists, so they can no longer reference ratio_series: like the samples, they are found only through their
// series (readers join ratio_series) and removed with it by a trigger. Parts whose series never came (the process or
// PostgreSQL stopped between the two commits) are removed by the housekeeping sweep once no upload holds their lock.
export class RawFileApart1766170000000 implements MigrationInterface {
  name = 'RawFileApart1766170000000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      ALTER TABLE ratio_series_file DROP CONSTRAINT ratio_series_file_series_id_fkey;
      CREATE FUNCTION ratio_series_drop_file() RETURNS trigger LANGUAGE plpgsql SET search_path = public, pg_temp AS $$
      BEGIN
        DELETE FROM ratio_series_file WHERE series_id = OLD.id;
        RETURN OLD;
      END $$;
      CREATE TRIGGER ratio_series_file_gone AFTER DELETE ON ratio_series
        FOR EACH ROW EXECUTE FUNCTION ratio_series_drop_file();
    `);
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query(`
      DROP TRIGGER ratio_series_file_gone ON ratio_series;
      DROP FUNCTION ratio_series_drop_file();
      DELETE FROM ratio_series_file f WHERE NOT EXISTS (SELECT 1 FROM ratio_series s WHERE s.id = f.series_id);
      ALTER TABLE ratio_series_file ADD CONSTRAINT ratio_series_file_series_id_fkey
        FOREIGN KEY (series_id) REFERENCES ratio_series(id) ON DELETE CASCADE;
    `);
  }
}
