import type { Browser } from 'playwright-core';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { computeCampaignResult } from '../../server/results/results.service';
import { launchBrowser, screenshot, signInWithBrowser, startE2eServer, type E2eServer } from '../helpers/browser';
import { tokenFor } from '../helpers/test-app';

// The coordinator opens the demo calibration chain: ΔC with U, k and p, the before/after check with its Eₙ and the
// budget in which the transportable clock's own systematic cancels. Numbers on the page are checked against the API.
// Then certifies the chain and finds the chain certificate and its signed PDF.

let srv: E2eServer;
let browser: Browser;
beforeAll(async () => {
  srv = await startE2eServer();
  browser = await launchBrowser();
  // The chain is computed from its campaigns' results (as the result worker would have stored them).
  const ids: { id: string }[] = await srv.ds.query("SELECT unnest(ARRAY[remote_campaign_id, before_campaign_id, after_campaign_id]) AS id FROM calibration_chain WHERE name = 'NGCO-TSr1 Harbour Light chain (April–June 2026)'");
  for (const { id } of ids.filter((x) => x.id)) {
    const has = await srv.ds.query('SELECT 1 FROM comparison_result WHERE campaign_id = $1', [id]);
    if (has.length === 0) await srv.ds.transaction((m) => computeCampaignResult(m, id, { actor: null, now: new Date() }));
  }
  // The demo seed certified the chain; withdraw that certificate so the coordinator can certify the chain here.
  const token = await tokenFor(srv, 'ansel.brandt@geopotential-office.invalid');
  const seeded: { number: string }[] = await srv.ds.query("SELECT c.number FROM certificate c JOIN calibration_chain ch ON ch.id = c.chain_id WHERE ch.name = 'NGCO-TSr1 Harbour Light chain (April–June 2026)' AND c.state = 'valid'");
  for (const { number } of seeded) {
    const res = await request(srv.app).post(`/api/v1/certificates/${number}/revoke`).set('authorization', `Bearer ${token}`).send({ reason: 'Withdrawn by the browser test to certify the chain again.' });
    expect(res.status).toBe(200);
  }
}, 180_000);
afterAll(async () => {
  await browser?.close();
  await srv?.stop();
});

describe('calibration chain pages', () => {
  it('the coordinator opens the demo chain’s result', async () => {
    const context = await browser.newContext({ viewport: { width: 1400, height: 1200 } });
    const page = await context.newPage();
    await signInWithBrowser(page, srv.baseUrl, 'ansel.brandt@geopotential-office.invalid', '/chains');
    await page.getByRole('link', { name: 'NGCO-TSr1 Harbour Light chain (April–June 2026)' }).click();
    await page.getByTestId('chain-result').waitFor();
    const id = page.url().split('/').pop()!;
    const r = await page.evaluate(async (i) => (await fetch(`/api/v1/chains/${i}/result`)).json(), id);
    const text = await page.getByTestId('chain-result').textContent();
    const fmt = (v: number) => (v < 0 ? `−${Math.abs(v).toFixed(3)}` : v.toFixed(3));
    expect(text).toContain(`${fmt(r.deltaC_m2s2.value)} m²/s²`);
    expect(text).toContain(`U = ${fmt(r.deltaC_m2s2.expandedUncertainty)} m²/s²`);
    await expect(page.getByText(/k = \d\.\d\d, p = 95\.45 %/).first().isVisible()).resolves.toBe(true);
    await expect(page.getByTestId('before-after').textContent()).resolves.toContain(`Eₙ = ${r.beforeAfter.en.toFixed(2)}`);
    await expect(page.getByTestId('chain-budget').textContent()).resolves.toContain('cancels exactly');
    await expect(page.getByText('verify against your national datum authority', { exact: false }).first().isVisible()).resolves.toBe(true);
    await screenshot(page, 'chain-result');

    // Every campaign of the chain is accepted: the coordinator certifies the chain and follows the job to the file.
    await page.getByTestId('certify-chain').click();
    const dialog = page.getByTestId('confirm-dialog');
    await expect(dialog.getByTestId('confirm-consequences').textContent()).resolves.toContain('why its systematic offset cancels');
    await dialog.getByLabel(/Comment for the certificate/).fill('Chain reviewed: both calibrations, the deployments and the pinned budgets.');
    await dialog.getByRole('button', { name: 'Issue and sign' }).click();
    const bar = dialog.getByRole('progressbar', { name: 'Issuing the certificate' });
    await bar.waitFor({ timeout: 30_000 });
    const link = dialog.getByRole('link', { name: /^certificate CL-/ });
    await link.waitFor({ timeout: 180_000 });
    await screenshot(page, 'chain-certify-dialog');
    const number = (await link.textContent())!.replace('certificate ', '');
    await link.click();
    await page.getByTestId('certificate-number').waitFor();
    await expect(page.getByTestId('certificate-number').textContent()).resolves.toBe(number);
    await expect(page.getByTestId('chain-certificate').isVisible()).resolves.toBe(true);
    await expect(page.getByTestId('download-pdf').getAttribute('href')).resolves.toBe(`/api/v1/certificates/${number}/pdf`);
    await screenshot(page, 'chain-certificate-page');
    // Back on the chain page the certificate is listed with its download link, and no second certify action is offered.
    await page.goto(`${srv.baseUrl}/chains/${id}`);
    await page.getByTestId('chain-certificates').waitFor();
    await expect(page.getByTestId('chain-certificates').textContent()).resolves.toContain(number);
    // The seeded (withdrawn) certificate is listed too; the new one has its own download link.
    const item = page.getByTestId('chain-certificates').locator('li', { hasText: number });
    await expect(item.getByTestId('chain-certificate-pdf').getAttribute('href')).resolves.toBe(`/api/v1/certificates/${number}/pdf`);
    await expect(page.getByTestId('certify-chain').count()).resolves.toBe(0);
    await expect(page.getByRole('button', { name: 'Delete' }).count()).resolves.toBe(0); // a certified chain stays
    await screenshot(page, 'chain-with-certificate');
    await page.goto(`${srv.baseUrl}/chains`);
    await page.getByRole('button', { name: 'New chain' }).click();
    await page.getByText('New calibration chain').waitFor();
    await screenshot(page, 'chain-new-form');
    await context.close();
  }, 120_000);
});
