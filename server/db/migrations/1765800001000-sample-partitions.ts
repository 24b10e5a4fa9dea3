import type { MigrationInterface, QueryRunner } from 'typeorm';

// Samples partitioned by series (PostgreSQL declarative partitioning, PARTITION BY HASH (series_id)), so a table of
// 10⁹ samples stays maintainable: each partition is vacuumed, analysed and re-indexed on its own, and every query
// names one series and so touches one partition. series_id is also the key a distributed PostgreSQL would shard
// on: all rows of a series live together and no query joins samples of two series. Uploads still COPY into the
// parent table; PostgreSQL routes each row. 16 partitions is a starting point; hash partitions can be split later
// by detaching one and re-attaching its rows under a larger modulus (docs/operations.md).
export const SAMPLE_PARTITIONS = 16;

export class SamplePartitions1765800001000 implements MigrationInterface {
  name = 'SamplePartitions1765800001000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      ALTER TABLE ratio_sample RENAME TO ratio_sample_unpartitioned;
      ALTER INDEX ratio_sample_series RENAME TO ratio_sample_unpartitioned_series;
      CREATE TABLE ratio_sample (
        series_id uuid NOT NULL,
        mjd float8 NOT NULL,
        y float8 NOT NULL,
        valid boolean NOT NULL
      ) PARTITION BY HASH (series_id);
    `);
    for (let i = 0; i < SAMPLE_PARTITIONS; i++) {
      await q.query(`CREATE TABLE ratio_sample_p${String(i).padStart(2, '0')} PARTITION OF ratio_sample FOR VALUES WITH (MODULUS ${SAMPLE_PARTITIONS}, REMAINDER ${i})`);
    }
    await q.query(`
      CREATE INDEX ratio_sample_series ON ratio_sample USING brin (series_id, mjd) WITH (pages_per_range = 16);
      INSERT INTO ratio_sample (series_id, mjd, y, valid) SELECT series_id, mjd, y, valid FROM ratio_sample_unpartitioned ORDER BY series_id, mjd;
      DROP TABLE ratio_sample_unpartitioned;
    `);
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query(`
      CREATE TABLE ratio_sample_plain (series_id uuid NOT NULL, mjd float8 NOT NULL, y float8 NOT NULL, valid boolean NOT NULL);
      INSERT INTO ratio_sample_plain SELECT * FROM ratio_sample ORDER BY series_id, mjd;
      DROP TABLE ratio_sample;
      ALTER TABLE ratio_sample_plain RENAME TO ratio_sample;
      CREATE INDEX ratio_sample_series ON ratio_sample USING brin (series_id, mjd) WITH (pages_per_range = 16);
    `);
  }
}
