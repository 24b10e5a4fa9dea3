// Benchmark: backup (pg_dump -Fc) and restore (pg_restore into a new database) of the invented demo database, the
// way `npm run admin -- backup` / `restore` do them, on a fresh local cluster with fsync on. Prints figures for
// docs/operations.md; never fails on time. Run with `npm run bench -- backup`.
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
// @ts-expect-error plain ESM helper shared with `npm start`
import { APP_ROLE, freePort, prepareRoles, startCluster } from '../../scripts/lib/postgres.mjs';
import { verifyAuditChain } from '../../server/audit/verify';
import { backupDatabase, restoreDatabase } from '../../server/db/backup';
import { openDatabase } from '../../server/db/data-source';
import { migrateDatabase } from '../../server/db/roles';
import { seedDemo } from '../../seeds/demo';
import { startBenchTsa, stopBenchTsa } from './bench-tsa';

const tmp = fs.mkdtempSync(path.join(os.tmpdir(), 'chronolevel-backup-bench-'));
process.env.PG_FSYNC = 'on';
process.env.SECRETS_DIR = path.join(tmp, 'secrets');
const port = await freePort();
const cluster = await startCluster({ dataDir: path.join(tmp, 'pg'), port, database: 'chronolevel', log: () => {} });
try {
  const { migrationUrl, appUrl } = prepareRoles({ port, database: 'chronolevel' });
  await migrateDatabase({ migrationUrl, appRole: APP_ROLE });
  const ds = await openDatabase(appUrl, { migrate: false });
  await startBenchTsa(tmp);
  await seedDemo(ds);
  const [size] = await ds.query(`SELECT pg_size_pretty(pg_database_size(current_database())) AS size,
    (SELECT count(*) FROM ratio_sample)::int AS samples, (SELECT count(*) FROM audit_event)::int AS events, (SELECT count(*) FROM certificate)::int AS certificates`);
  await ds.destroy();
  const file = path.join(tmp, 'demo.dump');
  const b = await backupDatabase({ databaseUrl: migrationUrl, out: file });
  const r = await restoreDatabase({ adminUrl: `postgres://chronolevel@127.0.0.1:${port}/postgres`, file, database: 'chronolevel_restored', owner: 'chronolevel_owner' });
  const restored = await openDatabase(appUrl.replace(/\/chronolevel$/, '/chronolevel_restored'), { migrate: false });
  const t0 = performance.now();
  const chain = await verifyAuditChain(restored);
  const verifyMs = performance.now() - t0;
  await restored.destroy();
  console.log(`demo database: ${size.size} (${size.samples} ratio samples, ${size.events} audit events, ${size.certificates} certificates)`);
  console.log(`backup  (pg_dump -Fc):         ${b.seconds.toFixed(2)} s, ${(b.bytes / 1e6).toFixed(2)} MB`);
  console.log(`restore (new db + pg_restore): ${r.seconds.toFixed(2)} s`);
  console.log(`audit-verify on the restored copy: ${verifyMs.toFixed(0)} ms, ${chain.ok ? 'intact' : 'BROKEN'}`);
} finally {
  await stopBenchTsa();
  cluster.stop();
  fs.rmSync(tmp, { recursive: true, force: true });
}
