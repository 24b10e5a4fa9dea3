// Recomputation benchmark: a campaign result from 1,000,000 stored samples (1 s spacing, about 11.6 days) in a private
// PostgreSQL — load, tide correction at both sites, stability, mean, budget, store. Target from the issue: < 3 s.
// Prints figures only; nothing fails on time.
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { Readable } from 'node:stream';
import type pg from 'pg';
// @ts-expect-error plain ESM helper shared with `npm start`
import { freePort, startCluster } from '../../scripts/lib/postgres.mjs';
import { openDatabase } from '../../server/db/data-source';
import { getCampaignForResult } from '../../server/campaigns/campaigns.service';
import { computeResultBody } from '../../server/results/compute-result';
import { computeCampaignResult, loadCampaignSamples } from '../../server/results/results.service';
import { seedDemo } from '../../seeds/demo';
import { loadCampaignForUpload, storeSeries } from '../../server/uploads/uploads.service';
import { startBenchTsa, stopBenchTsa } from './bench-tsa';

const ROWS = Number(process.env.RECOMPUTE_ROWS ?? 1_000_000);
const tmp = fs.mkdtempSync(path.join(os.tmpdir(), 'chronolevel-recompute-bench-'));
process.env.PG_FSYNC ??= 'off';

const seconds = (t0: number) => ((performance.now() - t0) / 1000).toFixed(3);

/** Invented series: an offset plus white FM (σ = 3e-16 at 1 s, Park–Miller + Box–Muller), every 997th sample flagged, every 50 000th missing. */
function* csvRows(): Generator<Buffer> {
  let seed = 424_242;
  const rnd = () => (seed = (seed * 16_807) % 2_147_483_647) / 2_147_483_647;
  let chunk = 'mjd,y,flag\n';
  for (let i = 0; i < ROWS; i++) {
    if (i % 50_000 === 49_999) continue;
    const y = 6.4321e-14 + 3e-16 * Math.sqrt(-2 * Math.log(rnd())) * Math.cos(2 * Math.PI * rnd());
    chunk += `${(61_416 + (i + 0.5) / 86_400).toFixed(9)},${y.toExponential(12)},${i % 997 === 0 ? 0 : 1}\n`;
    if (chunk.length > 1 << 16) {
      yield Buffer.from(chunk);
      chunk = '';
    }
  }
  yield Buffer.from(chunk);
}

async function main() {
  const port = await freePort();
  const cluster = await startCluster({ dataDir: path.join(tmp, 'pg'), port, database: 'bench', log: () => {} });
  const ds = await openDatabase(cluster.url);
  try {
    await startBenchTsa(tmp);
    await seedDemo(ds);
    const [{ id: campaignId }] = await ds.query("SELECT id FROM campaign WHERE state = 'draft' AND name LIKE 'SCL–HMO%' LIMIT 1");
    // 1 s spacing: more than 1.5 million samples run past the demo campaign's period, which is widened to hold them
    if (ROWS > 1_500_000) await ds.query("UPDATE campaign SET period_end = period_start + make_interval(secs => $2) WHERE id = $1", [campaignId, ROWS + 86_400]);
    let t = performance.now();
    // Stored through the uploads' own write path (COPY + raw file + series row in one transaction), as a lab upload would be.
    const campaignForUpload = (await loadCampaignForUpload(ds, campaignId))!;
    const qr = ds.createQueryRunner();
    await qr.connect();
    const client = (qr as unknown as { databaseConnection: pg.PoolClient }).databaseConnection;
    let seriesId = '';
    try {
      await client.query('BEGIN');
      const row = await storeSeries(client, null, {
        campaign: campaignForUpload, fileName: 'bench-series.csv', source: Readable.from(csvRows()), limitBytes: 1 << 30, invented: true,
        fields: { epochColumn: '1', epochKind: 'mjd', valueColumn: '2', valueKind: 'offset', flagColumn: '3', hasHeader: 'true' },
      });
      seriesId = row.id;
      await client.query('COMMIT');
    } finally {
      await qr.release();
    }
    await ds.query('ANALYZE ratio_sample');
    console.log(`stored ${ROWS} samples in ${seconds(t)} s (set-up, not part of the figure)`);

    // Stages, each timed on its own (warm database cache after the first load).
    t = performance.now();
    const samples = await loadCampaignSamples(ds.manager, campaignId);
    console.log(`load ${samples.y.length} samples from PostgreSQL: ${seconds(t)} s`);
    const campaign = await getCampaignForResult(ds.manager, campaignId);
    t = performance.now();
    const body = computeResultBody({ campaign, files: [{ seriesId, name: 'bench-series.csv', sha256: 'ab'.repeat(32), sampleCount: ROWS }], samples });
    console.log(`compute (tides at both sites, grid, stability, mean, budget, decimation): ${seconds(t)} s — ${body.stability.points.length} τ values, y = ${body.fractionalOffset.y.toExponential(6)} ± ${body.fractionalOffset.standardUncertainty.toExponential(2)}`);
    console.log(`grid: ${body.samples.note}`);

    for (let run = 1; run <= 3; run++) {
      t = performance.now();
      const r = await ds.transaction((m) => computeCampaignResult(m, campaignId, { actor: null, now: new Date(), force: true }));
      console.log(`full recomputation ${run} (load + compute + store + audit): ${seconds(t)} s  [target < 3 s] — ${r.result.samples.valid} valid samples, ${r.result.samples.missingEpochs} missing epochs`);
    }
    t = performance.now();
    await ds.transaction((m) => computeCampaignResult(m, campaignId, { actor: null, now: new Date() }));
    console.log(`unchanged inputs (hash check, stored result returned): ${seconds(t)} s`);
    console.log(`peak RSS of this process: ${(Number(/VmHWM:\s+(\d+)/.exec(fs.readFileSync('/proc/self/status', 'utf8'))?.[1] ?? 0) / 1024).toFixed(0)} MB`);
  } finally {
    await ds.destroy();
    await stopBenchTsa();
    await cluster.stop();
    fs.rmSync(tmp, { recursive: true, force: true });
  }
}

main().catch((e) => {
  console.error(e);
  process.exit(1);
});
