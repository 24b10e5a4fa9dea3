import type { MigrationInterface, QueryRunner } from 'typeorm';

// The raw file of an upload (ratio_series_file, parts of ≤ 1 MiB) was stored uncompressed. CSV of digits shrinks to
// about a third with LZ4, and PostgreSQL's LZ4 TOAST compression costs less time than writing the bytes saved (an
// upload of 1,000,000 rows: 41 MB of file stored as 13 MB). Parts are always read whole, so compression changes no
// reader. Only when the server was built with LZ4 (PostgreSQL 14 or later, `--with-lz4`, as Debian builds it): the
// built-in alternative, pglz, took three times as long as storing the file uncompressed, so the file then stays as it
// was. Parts stored before keep their form; PostgreSQL reads both.
export class RawFileLz41766140000000 implements MigrationInterface {
  name = 'RawFileLz41766140000000';

  async up(q: QueryRunner): Promise<void> {
    const rows = (await q.query(
      "SELECT 'lz4' = ANY (enumvals) AS lz4 FROM pg_settings WHERE name = 'default_toast_compression'",
    )) as { lz4: boolean }[];
    if (!rows[0]?.lz4) return;
    await q.query('ALTER TABLE ratio_series_file ALTER COLUMN bytes SET STORAGE EXTENDED, ALTER COLUMN bytes SET COMPRESSION lz4');
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query('ALTER TABLE ratio_series_file ALTER COLUMN bytes SET STORAGE EXTERNAL, ALTER COLUMN bytes SET COMPRESSION default');
  }
}
