import { readFileSync } from 'node:fs';
import { spawnSync } from 'node:child_process';
import type { Browser, Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, inject, it } from 'vitest';
import { acceptedCampaign } from '../helpers/accepted-campaign';
import { launchBrowser, screenshot, signInWithBrowser, startE2eServer, type E2eServer } from '../helpers/browser';

// The auditor's journey: find a certificate, download the signed PDF, check it on the public page; then the
// coordinator withdraws it and the auditor sees it withdrawn, in the list and on the public check.

const COORDINATOR = 'ansel.brandt@geopotential-office.invalid';
const AUDITOR = 'petra.lind@audit-bureau.invalid';
const CAMPAIGN = 'Coastal–mountain comparison, August';

let srv: E2eServer;
let browser: Browser;
let campaignId: string;
let number: string;
const pdfPath = 'test-results/auditor-download.pdf';

beforeAll(async () => {
  process.env.SECRETS_DIR = inject('secretsDir'); // the demo seed signs with the key this server pins
  srv = await startE2eServer();
  browser = await launchBrowser();
  campaignId = await acceptedCampaign(srv, CAMPAIGN, '2026-08-03T00:00:00Z');
});
afterAll(async () => {
  await browser?.close();
  await srv?.stop();
});

async function as(email: string, path: string): Promise<Page> {
  const context = await browser.newContext({ acceptDownloads: true, viewport: { width: 1280, height: 900 } });
  const page = await context.newPage();
  await signInWithBrowser(page, srv.baseUrl, email, path);
  return page;
}

describe('auditor journey', () => {
  it('the coordinator issues the certificate of the accepted campaign', async () => {
    const page = await as(COORDINATOR, '/certificates');
    const row = page.getByTestId('awaiting-certificate').locator('li', { hasText: CAMPAIGN });
    await screenshot(page, 'certificates-awaiting-coordinator');
    await row.getByRole('button', { name: 'Issue certificate' }).click();
    const dialog = page.getByTestId('confirm-dialog');
    await dialog.getByLabel(/Comment for the certificate/).fill('Reviewed and certified for the audit.');
    await dialog.getByLabel(/Justification|Why certify/).fill('Audit demo: any exception was discussed with both labs.');
    await dialog.getByRole('button', { name: 'Issue and sign' }).click();
    // A worker renders, time-stamps and signs; the dialog then links to the certificate.
    const link = dialog.getByRole('link', { name: /^certificate CL-/ });
    await link.waitFor({ timeout: 180_000 });
    await link.click();
    await page.getByTestId('certificate-number').waitFor({ timeout: 30_000 });
    number = (await page.getByTestId('certificate-number').textContent())!.trim();
    expect(number).toMatch(/^CL-\d{4}-\d{5}-r1$/);
    await expect(page.getByTestId('certificate-state').textContent()).resolves.toContain('Valid');
    await screenshot(page, 'certificate-issued-coordinator');
    await page.context().close();
  });

  it('the auditor finds it, downloads the signed PDF and verifies it on the public page', async () => {
    const page = await as(AUDITOR, '/');
    await page.getByRole('link', { name: 'Certificates' }).first().click();
    await page.getByRole('link', { name: number }).click();
    await page.getByTestId('certificate-number').waitFor();
    await page.getByRole('button', { name: 'Show' }).click();
    // The snapshot reads as a table first, the raw JSON one click away.
    await page.getByTestId('snapshot-table').getByText('Audit chain head').waitFor();
    await page.getByRole('button', { name: 'Raw JSON' }).click();
    await page.getByTestId('snapshot-json').getByText('auditChainHead').waitFor();
    await screenshot(page, 'certificate-detail-auditor');
    const [download] = await Promise.all([page.waitForEvent('download'), page.getByTestId('download-pdf').click()]);
    await download.saveAs(pdfPath);
    const pdf = readFileSync(pdfPath);
    expect(pdf.subarray(0, 5).toString('latin1')).toBe('%PDF-');
    // Independent check of the file the browser saved: Debian poppler-utils' pdfsig.
    expect(spawnSync('pdfsig', [pdfPath], { encoding: 'utf8' }).stdout).toContain('Signature is Valid.');

    await page.goto(`${srv.baseUrl}/verify`);
    await page.getByTestId('verify-file').setInputFiles(pdfPath);
    await page.getByRole('button', { name: 'Check the file' }).click();
    await expect(page.getByTestId('verify-result').getAttribute('data-verdict')).resolves.toBe('valid');
    await expect(page.getByTestId('verify-result').textContent()).resolves.toContain(number);
    // The signature in detail: PAdES B-LTA, the chain to the root offered below, the embedded files.
    await expect(page.getByTestId('signature-report').getAttribute('data-level')).resolves.toBe('B-LTA');
    await expect(page.getByTestId('signature-attachments').textContent()).resolves.toContain(`${number}.snapshot.json`);
    const anchor = await (await fetch(`${srv.baseUrl}/api/v1/pki/trust-anchor`)).json();
    await expect(page.getByTestId('trust-anchor-fingerprint').textContent()).resolves.toBe(anchor.sha256Fingerprint);
    await expect(page.getByTestId('signature-chain').textContent()).resolves.toContain(anchor.sha256Fingerprint);
    await screenshot(page, 'verify-valid');

    await page.goto(`${srv.baseUrl}/audit/campaigns/${campaignId}`);
    await page.getByTestId('audit-timeline').getByText('issued').first().waitFor();
    await screenshot(page, 'audit-timeline');
    await page.context().close();
  });

  it('the coordinator withdraws it and the auditor sees it withdrawn', async () => {
    const coordinator = await as(COORDINATOR, `/certificates/${number}`);
    await coordinator.getByRole('button', { name: 'Withdraw…' }).click();
    await coordinator.getByLabel('Why is the certificate withdrawn?').fill('Link delay calibration found wrong after issue');
    await coordinator.getByRole('button', { name: 'Withdraw the certificate' }).click();
    await coordinator.getByTestId('revocation').waitFor();
    await screenshot(coordinator, 'certificate-withdrawn-coordinator');
    await coordinator.context().close();

    const page = await as(AUDITOR, '/certificates');
    await page.getByLabel('State').selectOption('revoked');
    await page.getByRole('link', { name: number }).waitFor();
    await screenshot(page, 'certificates-list-withdrawn');
    await page.getByRole('link', { name: number }).click();
    await expect(page.getByTestId('revocation').textContent()).resolves.toContain('Link delay calibration found wrong after issue');
    // The certificate page links to the public check with the number and SHA-256, which runs at once.
    await page.getByRole('link', { name: 'Public check' }).click();
    await expect(page.getByTestId('verify-result').getAttribute('data-verdict')).resolves.toBe('revoked');

    // The public page, as anyone who was sent the file would use it: no sign-in.
    const stranger = await (await browser.newContext()).newPage();
    await stranger.goto(`${srv.baseUrl}/verify`);
    await stranger.getByTestId('verify-file').setInputFiles(pdfPath);
    await stranger.getByRole('button', { name: 'Check the file' }).click();
    await expect(stranger.getByTestId('verify-result').getAttribute('data-verdict')).resolves.toBe('revoked');
    await expect(stranger.getByTestId('verify-result').textContent()).resolves.toContain('Link delay calibration found wrong after issue');
    await screenshot(stranger, 'verify-revoked');
    await stranger.context().close();
    await page.context().close();
  });
});
