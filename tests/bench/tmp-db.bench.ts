import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
// @ts-expect-error plain ESM
import { freePort, startCluster } from '../../scripts/lib/postgres.mjs';
import { openDatabase } from '../../server/db/data-source';
import { seedDemo } from '../../seeds/demo';
import { scaleDemo } from '../../seeds/scale.seed';
import { startBenchTsa } from './bench-tsa';
process.env.PG_FSYNC ??= 'off';
const tmp = '/work/tmp/pgkeep';
fs.rmSync(tmp, { recursive: true, force: true }); fs.mkdirSync(tmp);
async function main() {
  const port = 55432;
  const cluster = await startCluster({ dataDir: path.join(tmp, 'pg'), port, database: 'load', log: () => {} });
  const ds = await openDatabase(cluster.url);
  await startBenchTsa(tmp);
  await seedDemo(ds);
  await scaleDemo(ds);
  console.log(cluster.url);
  await ds.destroy();
  process.exit(0);
}
void main();
