import type { MigrationInterface, QueryRunner } from 'typeorm';

// A second, coarser level of a series' plot summary: up to 16 consecutive blocks of `overview` merged (never across
// a gap), with their merged mean and M2. A plot of the whole span of a long series (10⁷ samples ≈ 156 000 blocks,
// 8.75 MB) then reads ≈ 10 000 coarse blocks (0.55 MB) instead. NULL for series stored before; their plots read the
// fine level as before.
export class SeriesOverviewCoarse1766130000000 implements MigrationInterface {
  name = 'SeriesOverviewCoarse1766130000000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      ALTER TABLE ratio_series ADD COLUMN overview_coarse bytea, ADD COLUMN overview_coarse_stats bytea;
      -- float64 arrays hardly compress: storing them uncompressed saves the decompression on every cold read
      ALTER TABLE ratio_series ALTER COLUMN overview_coarse SET STORAGE EXTERNAL, ALTER COLUMN overview_coarse_stats SET STORAGE EXTERNAL,
        ALTER COLUMN overview SET STORAGE EXTERNAL, ALTER COLUMN overview_stats SET STORAGE EXTERNAL;
    `);
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query(`
      ALTER TABLE ratio_series DROP COLUMN overview_coarse, DROP COLUMN overview_coarse_stats;
      ALTER TABLE ratio_series ALTER COLUMN overview SET STORAGE EXTENDED, ALTER COLUMN overview_stats SET STORAGE EXTENDED;
    `);
  }
}
