import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import type { Browser } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { launchBrowser, screenshot, signInWithBrowser, startE2eServer, type E2eServer } from '../helpers/browser';

// Lab staff journey, upload part: the operator picks a large ratio file on a seeded draft campaign, checks the
// preview and the suggested columns, uploads a 1,000,000-row file with the visible progress bars and sees the plot
// (rows per second and memory are measured in tests/bench/ingest.bench.ts, never here).
const ROWS = 1_000_000;
let srv: E2eServer;
let browser: Browser;
let csvFile: string;

beforeAll(async () => {
  srv = await startE2eServer();
  browser = await launchBrowser();
  csvFile = path.join(fs.mkdtempSync(path.join(os.tmpdir(), 'chronolevel-e2e-upload-')), 'sr-run-2027-01.csv');
  // Invented series inside the draft campaign's period (2027-01-11 … 2027-01-29 = MJD 61416 … 61434), 1 s spacing,
  // with an hour-long gap so the plot shows a break.
  const fd = fs.openSync(csvFile, 'w');
  let s = '# invented e2e series\nmjd,ratio,flag\n';
  let seed = 7;
  for (let i = 0; i < ROWS; i++) {
    if (i >= 100_000 && i < 103_600) continue;
    seed = (seed * 16807) % 2147483647;
    const units = Math.round((seed / 2147483647 - 0.5) * 60_000) + 5_900_000; // about 5.9e-14 plus noise, in 1e-20
    s += `${(61417 + i / 86400).toFixed(9)},1.${String(units).padStart(20, '0')},${i % 5000 === 17 ? 0 : 1}\n`;
    if (s.length > 1 << 20) {
      fs.writeSync(fd, s);
      s = '';
    }
  }
  fs.writeSync(fd, s);
  fs.closeSync(fd);
});
afterAll(async () => {
  await browser?.close();
  await srv?.stop();
  fs.rmSync(path.dirname(csvFile), { recursive: true, force: true });
});

describe('uploading a ratio series', () => {
  it('shows the preview, the progress and the plot of the stored series', async () => {
    const [{ id }] = await srv.ds.query("SELECT id FROM campaign WHERE name = 'SCL–HMO Sr run January 2027'");
    const context = await browser.newContext({ viewport: { width: 1280, height: 900 } });
    const page = await context.newPage();
    await signInWithBrowser(page, srv.baseUrl, 'ines.varga@saltmarsh-lab.invalid', `/campaigns/${id}`);
    await page.getByLabel('Series file').setInputFiles(csvFile);
    await page.getByTestId('preview-summary').waitFor();
    await expect(page.getByTestId('preview-summary').textContent()).resolves.toContain('header line found');
    await expect(page.getByLabel('Value is').inputValue()).resolves.toBe('ratio');
    await expect(page.getByLabel('Flag column').inputValue()).resolves.toBe('3');
    await screenshot(page, 'upload-preview');
    await page.getByRole('button', { name: /^Upload / }).click();
    await page.getByTestId('upload-progress').waitFor();
    await screenshot(page, 'upload-progress');
    await page.getByRole('status').filter({ hasText: 'Stored' }).waitFor({ timeout: 120_000 });
    await expect(page.getByRole('status').textContent()).resolves.toContain(`Stored ${(ROWS - 3600).toLocaleString('en')} rows`);
    await expect(page.getByTestId('progress-processed').getByRole('progressbar').getAttribute('aria-valuenow')).resolves.toBe('100');
    await page.getByTestId('time-series-plot').waitFor();
    await page.getByRole('cell', { name: 'sr-run-2027-01.csv' }).waitFor();
    await screenshot(page, 'upload-plot');
    const [{ n }] = await srv.ds.query('SELECT count(*)::int AS n FROM ratio_sample s JOIN ratio_series r ON r.id = s.series_id WHERE r.campaign_id = $1', [id]);
    expect(n).toBe(ROWS - 3600);
    await context.close();
  });
});
