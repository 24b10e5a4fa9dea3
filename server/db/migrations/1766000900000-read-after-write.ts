import type { MigrationInterface, QueryRunner } from 'typeorm';

// Read-your-writes with read replicas (server/db/replicas.ts): per caller, the primary's WAL position after their
// last write. Read only on the primary; UNLOGGED because the rows matter for seconds (emptied after a crash, which
// only sends a few reads to a standby early) and are of no use on a standby.
export class ReadAfterWrite1766000900000 implements MigrationInterface {
  name = 'ReadAfterWrite1766000900000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      CREATE UNLOGGED TABLE read_after_write (
        caller text PRIMARY KEY,
        wal_lsn pg_lsn,
        until timestamptz NOT NULL
      );
    `);
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query('DROP TABLE read_after_write');
  }
}
