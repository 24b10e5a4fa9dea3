import type { MigrationInterface, QueryRunner } from 'typeorm';

// Tide systems stated, never assumed: the fixed value of a benchmark, a quasigeoid grid, a site's quasigeoid height
// and its ellipsoidal height (the crust system) each say which permanent-tide system they are in. NULL = not stated:
// such a value is not compared or adjusted until someone states it. Grids also carry the correlation length of
// their errors (NULL: the stated default applies).
export class TideSystems1765400000000 implements MigrationInterface {
  name = 'TideSystems1765400000000';

  async up(q: QueryRunner): Promise<void> {
    const check = (col: string) => `CHECK (${col} IN ('mean-tide','zero-tide','tide-free'))`;
    await q.query(`
      ALTER TABLE benchmark ADD COLUMN known_tide_system text ${check('known_tide_system')};
      ALTER TABLE quasigeoid_grid ADD COLUMN tide_system text ${check('tide_system')};
      ALTER TABLE quasigeoid_grid ADD COLUMN correlation_length_km double precision CHECK (correlation_length_km > 0);
      ALTER TABLE site ADD COLUMN quasigeoid_tide_system text ${check('quasigeoid_tide_system')};
      ALTER TABLE site ADD COLUMN ellipsoidal_crust_system text ${check('ellipsoidal_crust_system')};
    `);
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query(`
      ALTER TABLE site DROP COLUMN ellipsoidal_crust_system;
      ALTER TABLE site DROP COLUMN quasigeoid_tide_system;
      ALTER TABLE quasigeoid_grid DROP COLUMN correlation_length_km;
      ALTER TABLE quasigeoid_grid DROP COLUMN tide_system;
      ALTER TABLE benchmark DROP COLUMN known_tide_system;
    `);
  }
}
