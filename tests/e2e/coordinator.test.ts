import type { Browser } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { stopQueues } from '../../server/jobs/queue';
import { startWorker, type Worker } from '../../server/jobs/worker';
import { launchBrowser, screenshot, signInWithBrowser, startE2eServer, type E2eServer } from '../helpers/browser';

// The coordinator's journey through the levelling network: upload sections, see the failing loop, run an adjustment
// (queued, executed by the worker, progress shown), open the reconciliation and the map.

let srv: E2eServer;
let browser: Browser;
let worker: Worker;
beforeAll(async () => {
  srv = await startE2eServer();
  worker = await startWorker({ dataSource: srv.ds, databaseUrl: srv.databaseUrl, pollingIntervalSeconds: 0.5 });
  browser = await launchBrowser();
});
afterAll(async () => {
  await browser?.close();
  await worker?.stop();
  await stopQueues();
  await srv?.stop();
});

const coordinator = 'ansel.brandt@geopotential-office.invalid';
const csv = [
  'line,from,to,delta_h_m,length_km,mean_gravity_ms2,observed_on,forward_m,backward_m',
  'Harbour spur,CD-01,CD-06,,9.8,,2025-04-02,4.8012,-4.7990',
  'Harbour spur,CD-06,SCL-BM1,0.0021,6.1,9.81452,2025-04-03,,',
].join('\n');

describe('coordinator journey', () => {
  it('uploads sections, sees the failing loop, adjusts, reconciles and maps', async () => {
    const context = await browser.newContext({ viewport: { width: 1400, height: 1000 } });
    const page = await context.newPage();
    await signInWithBrowser(page, srv.baseUrl, coordinator, '/network/sections');

    // A bad file first: the line and column are named and nothing is stored.
    await page.getByLabel('Sections file').setInputFiles({ name: 'bad.csv', mimeType: 'text/csv', buffer: Buffer.from(csv.replace('6.1,9.81452', '6.1,nine')) });
    await page.getByRole('button', { name: 'Check and preview' }).click();
    await expect(page.getByRole('alert').first().textContent()).resolves.toContain('Line 3, column mean_gravity_ms2');
    await screenshot(page, 'coordinator-upload-error');

    // The first line has no Δn (the mean of the two runs is used) and no gravity (normal gravity is used).
    await page.getByLabel('Sections file').setInputFiles({ name: 'harbour.csv', mimeType: 'text/csv', buffer: Buffer.from(csv) });
    await page.getByRole('button', { name: 'Check and preview' }).click();
    await page.getByText('2 sections read, nothing stored yet').waitFor();
    await screenshot(page, 'coordinator-upload-preview');
    await page.getByRole('button', { name: 'Store 2 sections' }).click();
    await page.getByText('2 sections stored.').waitFor();
    await page.getByLabel('Filter by line or benchmark').fill('Harbour');
    await page.getByRole('cell', { name: 'Harbour spur' }).first().waitFor();
    await screenshot(page, 'coordinator-sections');

    await page.getByRole('link', { name: 'Loops' }).click();
    const firstLoop = page.getByTestId('loop').first();
    await firstLoop.waitFor();
    await expect(firstLoop.textContent()).resolves.toContain('over tolerance');
    await expect(firstLoop.textContent()).resolves.toContain('Dune road');
    await page.getByText('tolerance coefficient t = ').first().waitFor();
    await screenshot(page, 'coordinator-loops');

    await page.getByRole('link', { name: 'Adjustment runs' }).click();
    await page.getByRole('button', { name: 'Run adjustment' }).click();
    await page.waitForURL(/\/network\/runs\/[0-9a-f-]{36}$/);
    await page.getByTestId('run-state').filter({ hasText: 'finished' }).waitFor({ timeout: 30_000 });
    await expect(page.getByTestId('suspects').textContent()).resolves.toContain('Dune road');
    // A rejected global test is announced before the heights (the Dune road blunder makes σ̂0 well above 1).
    if ((await page.getByTestId('global-test').textContent())?.includes('rejected')) {
      await expect(page.getByTestId('global-test-failed').textContent()).resolves.toContain('provisional');
    }
    await screenshot(page, 'coordinator-run');

    // Give one accepted campaign a computed clock result (invented values) unless the demo already has one.
    const [campaign] = await srv.ds.query(`SELECT c.id FROM campaign c WHERE c.state IN ('accepted','certified') ORDER BY c.period_end DESC LIMIT 1`);
    const [has] = await srv.ds.query('SELECT count(*)::int AS n FROM comparison_result WHERE campaign_id = $1', [campaign.id]);
    if (has.n === 0) {
      await srv.ds.query(
        `INSERT INTO comparison_result (campaign_id, input_hash, constants, software_version, computed_at, computed_by, result)
         VALUES ($1, $2, '{}'::jsonb, 'test', now(), 'test', $3::jsonb)`,
        [campaign.id, 'b'.repeat(64), JSON.stringify({ deltaC_m2s2: { value: 5307.8, standardUncertainty: 0.05, expandedUncertainty: 0.1, coverageFactor: 2 } })],
      );
    }
    await page.getByRole('link', { name: 'Reconciliation' }).click();
    await page.getByText('scientific comparison').waitFor();
    await page.getByTestId('verdict').first().waitFor();
    // The demo's clock link joins two datums no levelling connects: no agree/disagree verdict, and no doubled code.
    // The demo chain (certified, so its campaigns' results are stored) reaches the Harbour Light gauge, which no levelling
    // reaches: its row says there is no levelled ΔC.
    const rows = await page.getByTestId('reconciliation-row').allTextContents();
    const campaignRows = rows.filter((r) => !r.includes('Harbour Light'));
    expect(campaignRows.length).toBeGreaterThan(0);
    expect(campaignRows.every((v) => v.includes('not comparable'))).toBe(true);
    expect(rows.filter((r) => r.includes('Harbour Light')).every((v) => v.includes('no levelled ΔC'))).toBe(true);
    await expect(page.getByTestId('reconciliation-row').first().textContent()).resolves.not.toContain('SCL SCL');
    await screenshot(page, 'coordinator-reconciliation');

    await page.getByRole('link', { name: 'Map', exact: true }).click();
    await page.getByRole('button', { name: 'Benchmark SCL-BM1' }).waitFor();
    await page.waitForTimeout(500);
    await page.getByTestId('scale-bar').waitFor();
    await screenshot(page, 'coordinator-map-whole');
    await page.getByLabel('Show').selectOption('Coastal Datum 1987');
    // Keyboard selection: every map feature is focusable and opens with Enter.
    await page.getByRole('button', { name: 'Benchmark SCL-BM1' }).focus();
    await page.keyboard.press('Enter');
    await expect(page.getByTestId('map-selection').textContent()).resolves.toContain('Saltmarsh laboratory pillar');
    await page.waitForTimeout(500);
    await screenshot(page, 'coordinator-map');
    await page.getByRole('link', { name: 'Open the benchmark →' }).click();
    await page.getByRole('heading', { name: 'Benchmark SCL-BM1' }).waitFor();
    await expect(page.getByTestId('entered-position').textContent()).resolves.toMatch(/longitude|easting|X /);
    await expect(page.getByTestId('known-height').textContent()).resolves.toContain('k = 1');
    await page.getByTestId('benchmark-sections').waitFor();
    await page.getByTestId('adjusted-height').filter({ hasText: 'm²/s²' }).waitFor();
    await screenshot(page, 'coordinator-benchmark');
    await context.close();
  });
});
