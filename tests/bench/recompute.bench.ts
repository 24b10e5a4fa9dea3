// Recomputation benchmark: a campaign result from 1,000,000 stored samples (1 s spacing, about 11.6 days) in a private
// PostgreSQL — load, tide correction at both sites, stability, mean, budget, store. Target from the issue: < 3 s.
// Prints figures only; nothing fails on time.
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
// @ts-expect-error plain ESM helper shared with `npm start`
import { freePort, startCluster } from '../../scripts/lib/postgres.mjs';
import { openDatabase } from '../../server/db/data-source';
import { getCampaignForResult } from '../../server/campaigns/campaigns.service';
import { computeResultBody } from '../../server/results/compute-result';
import { computeCampaignResult, loadCampaignSamples } from '../../server/results/results.service';
import { seedDemo } from '../../seeds/demo';

const ROWS = Number(process.env.RECOMPUTE_ROWS ?? 1_000_000);
const tmp = fs.mkdtempSync(path.join(os.tmpdir(), 'chronolevel-recompute-bench-'));
process.env.PG_FSYNC ??= 'off';

const seconds = (t0: number) => ((performance.now() - t0) / 1000).toFixed(3);

async function main() {
  const port = await freePort();
  const cluster = await startCluster({ dataDir: path.join(tmp, 'pg'), port, database: 'bench', log: () => {} });
  const ds = await openDatabase(cluster.url);
  try {
    await seedDemo(ds);
    const [{ id: campaignId }] = await ds.query("SELECT id FROM campaign WHERE state = 'draft' AND name LIKE 'SCL–HMO%' LIMIT 1");
    let t = performance.now();
    const [{ id: seriesId }] = await ds.query(
      `INSERT INTO ratio_series (id, campaign_id, file_name, sha256, byte_size, row_count, valid_count, first_mjd, last_mjd, uptime_fraction, tau0_seconds, mapping, raw_file_oid, invented, created_by)
       VALUES (gen_random_uuid(), $1, 'bench.csv', repeat('ab', 32), 1, $2, $2, 61416, 61416 + ($2 - 1) / 86400.0, 1, 1, '{}', lo_from_bytea(0, '\\x00'::bytea), true, 'bench') RETURNING id`,
      [campaignId, ROWS],
    );
    // White FM (uniform noise scaled to σ = 3e-16) on an invented offset; every 997th sample flagged, every 50 000th missing.
    await ds.query(
      `INSERT INTO ratio_sample (series_id, mjd, y, valid)
       SELECT $1, 61416 + i / 86400.0, 6.4321e-14 + 3e-16 * sqrt(12) * (random() - 0.5), i % 997 <> 0
         FROM generate_series(0, $2 - 1) AS i WHERE i % 50000 <> 49999`,
      [seriesId, ROWS],
    );
    await ds.query('ANALYZE ratio_sample');
    console.log(`stored ${ROWS} samples in ${seconds(t)} s (set-up, not part of the figure)`);

    // Stages, each timed on its own (warm database cache after the first load).
    t = performance.now();
    const samples = await loadCampaignSamples(ds.manager, campaignId);
    console.log(`load ${samples.y.length} samples from PostgreSQL: ${seconds(t)} s`);
    const campaign = await getCampaignForResult(ds.manager, campaignId);
    t = performance.now();
    const body = computeResultBody({ campaign, files: [{ seriesId, name: 'bench.csv', sha256: 'ab'.repeat(32), sampleCount: ROWS }], samples });
    console.log(`compute (tides at both sites, grid, stability, mean, budget, decimation): ${seconds(t)} s — ${body.stability.points.length} τ values, y = ${body.fractionalOffset.y.toExponential(6)} ± ${body.fractionalOffset.standardUncertainty.toExponential(2)}`);

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
    await cluster.stop();
    fs.rmSync(tmp, { recursive: true, force: true });
  }
}

main().catch((e) => {
  console.error(e);
  process.exit(1);
});
