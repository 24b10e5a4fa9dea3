import type { MigrationInterface, QueryRunner } from 'typeorm';

// A site's local tie to a benchmark may be given as a height difference Δh (m) or directly as a geopotential-number
// difference ΔC = C_site − C_benchmark (m²/s²), each with its standard uncertainty, and a source text.
export class SiteTiePotential1766050000000 implements MigrationInterface {
  name = 'SiteTiePotential1766050000000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      ALTER TABLE site ADD COLUMN tie_delta_c_m2s2 float8, ADD COLUMN tie_u_c_m2s2 float8, ADD COLUMN tie_source text;
      ALTER TABLE site DROP CONSTRAINT site_check1;
      -- a tie has a benchmark and exactly one quantity with its uncertainty
      ALTER TABLE site ADD CONSTRAINT site_tie_one_quantity CHECK (
        (benchmark_code IS NULL AND tie_height_difference_m IS NULL AND tie_u_m IS NULL AND tie_delta_c_m2s2 IS NULL AND tie_u_c_m2s2 IS NULL)
        OR (benchmark_code IS NOT NULL AND tie_height_difference_m IS NOT NULL AND tie_u_m IS NOT NULL AND tie_delta_c_m2s2 IS NULL AND tie_u_c_m2s2 IS NULL)
        OR (benchmark_code IS NOT NULL AND tie_height_difference_m IS NULL AND tie_u_m IS NULL AND tie_delta_c_m2s2 IS NOT NULL AND tie_u_c_m2s2 >= 0)
      );
    `);
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query(`ALTER TABLE site DROP CONSTRAINT site_tie_one_quantity, DROP COLUMN tie_delta_c_m2s2, DROP COLUMN tie_u_c_m2s2, DROP COLUMN tie_source,
      ADD CHECK ((benchmark_code IS NULL) = (tie_height_difference_m IS NULL) AND (benchmark_code IS NULL) = (tie_u_m IS NULL))`);
  }
}
