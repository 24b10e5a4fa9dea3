import type { Browser } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { stopQueues } from '../../server/jobs/queue';
import { startWorker, type Worker } from '../../server/jobs/worker';
import { launchBrowser, screenshot, signInWithBrowser, startE2eServer, type E2eServer } from '../helpers/browser';

// The reconciliation page shows the levelling σ from the covariance of the two adjusted sites (with the neglected-
// covariance value beside it), the tide-system conversion applied, and the σ policy; the run page shows the data-
// snooping removal order and the tide conversion of a fixed value. Numbers are checked against the API.

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

describe('reconciliation uncertainty and tide systems', () => {
  it('shows σ with covariance, the tide conversion and the σ policy; the run shows the removal order', async () => {
    const context = await browser.newContext({ viewport: { width: 1500, height: 1100 } });
    const page = await context.newPage();
    await signInWithBrowser(page, srv.baseUrl, coordinator, '/network/reconciliation');
    await page.getByTestId('reconciliation-row').first().waitFor();
    const rec = await page.evaluate(async () => (await fetch('/api/v1/network/reconciliation')).json());
    const withLevelling = rec.rows.filter((r: { levellingSigma_m2s2: number | null }) => r.levellingSigma_m2s2 !== null);
    expect(withLevelling.length).toBeGreaterThan(0);
    for (const r of withLevelling) {
      expect(r.levellingSigmaMethod).toBe('covariance');
      expect(r.levellingSigma_m2s2).toBeLessThanOrEqual(r.levellingSigmaIgnoringCovariance_m2s2 + 1e-12);
    }
    const sigmaText = async (r: { levellingSigma_m2s2: number; levellingSigmaIgnoringCovariance_m2s2: number }) =>
      (await page.getByTestId('levelling-sigma').allTextContents()).some((t) => t.includes('σ with covariance') && t.includes(r.levellingSigma_m2s2.toFixed(3)) && t.includes(r.levellingSigmaIgnoringCovariance_m2s2.toFixed(3)));
    expect(await sigmaText(withLevelling[0])).toBe(true);
    const tideTexts = await page.getByTestId('tide-conversion').allTextContents();
    // The demo's coastal datum is zero-tide, the clock results mean-tide: a conversion is applied and named.
    expect(tideTexts.some((t) => /compared in (mean|zero)-tide/.test(t) && t.includes('zero-tide') && t.includes('Ekman 1989'))).toBe(true);
    expect(rec.rows.some((r: { tide: { levellingShift_m2s2: number; clockShift_m2s2: number } | null }) => r.tide && Math.abs(r.tide.levellingShift_m2s2) + Math.abs(r.tide.clockShift_m2s2) > 0.1)).toBe(true);
    await expect(page.getByTestId('sigma-policy').textContent()).resolves.toContain('q_AA + q_BB − 2q_AB');
    await expect(page.getByTestId('sigma-policy').textContent()).resolves.toMatch(/not scaled by σ̂0|scaled by σ̂0/);
    await screenshot(page, 'reconciliation-covariance-tide');

    await page.goto(`${srv.baseUrl}/network/runs/${rec.levellingRunId}`);
    await page.getByTestId('removal-order').waitFor();
    await expect(page.getByTestId('removal-order').textContent()).resolves.toContain('Dune road');
    await expect(page.getByTestId('tide-conversions').textContent()).resolves.toContain('HD-01');
    await expect(page.getByTestId('sigma-policy').textContent()).resolves.toContain('σ0 = 1');
    await page.getByTestId('run-differences').waitFor();
    await screenshot(page, 'run-removals-tide');

    // Join the two datums by levelling and let the highland one hang on the coastal fixed benchmark (an invented what-if):
    // both sites now share the coastal levelling from CD-01 to SCL-BM1, so σ with the covariance is below the root-sum-square
    // (the junction starts at SCL's own benchmark; the long-line case is in the network-coverage benchmark).
    const [run] = await srv.ds.query('SELECT result FROM adjustment_run WHERE id = $1', [rec.levellingRunId]);
    const c = (code: string) => run.result.points.find((p: { code: string }) => p.code === code).c_m2s2;
    await srv.ds.query(`UPDATE benchmark SET fixed = false WHERE code = 'HD-01'`);
    await srv.ds.query(`INSERT INTO levelling_section (line_name, from_benchmark_id, to_benchmark_id, delta_height_m, length_km, mean_gravity_ms2)
      SELECT 'Valley junction (what-if)', a.id, b.id, $1, 310, 9.8125 FROM benchmark a, benchmark b WHERE a.code = 'SCL-BM1' AND b.code = 'HD-01'`, [(c('HD-01') - c('SCL-BM1')) / 9.8125]);
    await page.goto(`${srv.baseUrl}/network/runs`);
    await page.getByRole('button', { name: 'Run adjustment' }).click();
    await page.waitForURL(/\/network\/runs\/[0-9a-f-]{36}$/);
    await page.getByTestId('run-state').filter({ hasText: 'finished' }).waitFor({ timeout: 30_000 });
    await page.goto(`${srv.baseUrl}/network/reconciliation`);
    await page.getByTestId('reconciliation-row').first().waitFor();
    const rec2 = await page.evaluate(async () => (await fetch('/api/v1/network/reconciliation')).json());
    const joined = rec2.rows.find((r: { comparable: boolean }) => r.comparable);
    expect(joined).toBeDefined();
    expect(joined.levellingSigma_m2s2).toBeLessThan(joined.levellingSigmaIgnoringCovariance_m2s2 - 1e-4);
    expect(await sigmaText(joined)).toBe(true);
    await page.getByTestId('verdict').first().waitFor();
    await screenshot(page, 'reconciliation-joined-covariance');
    await context.close();
  });
});
