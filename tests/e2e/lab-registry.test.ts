import type { Browser } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { launchBrowser, screenshot, signInWithBrowser, startE2eServer, type E2eServer } from '../helpers/browser';
import { caughtMail } from '../helpers/test-app';

// Lab staff journey: a site from UTM coordinates, a clock with a budget, a fibre link, a campaign, submitted for review.

let srv: E2eServer;
let browser: Browser;
beforeAll(async () => {
  srv = await startE2eServer();
  browser = await launchBrowser();
});
afterAll(async () => {
  await browser?.close();
  await srv?.stop();
});

describe('lab staff registry journey', () => {
  it('registers a site, a clock, a link and a campaign, and submits it', async () => {
    const context = await browser.newContext({ viewport: { width: 1400, height: 1000 } });
    const page = await context.newPage();
    await signInWithBrowser(page, srv.baseUrl, 'ines.varga@saltmarsh-lab.invalid', '/sites');
    await page.getByRole('cell', { name: 'SCL clock hall' }).waitFor();
    await screenshot(page, 'lab-sites');

    // Site from ETRS89 / UTM 32N at an arbitrary point: 52.3°N 7.4°E ↔ E 390 898.4597, N 5 795 611.3641 (computed from the
    // Krüger n⁴ series of EPSG GN 7-2 §3.5.3.1 with Python mpmath).
    await page.getByRole('button', { name: 'New site' }).click();
    await page.getByLabel('Site name').fill('SCL field annex');
    await page.getByRole('textbox', { name: /^Reference point/ }).fill('Brass bolt on the annex pier');
    await page.getByLabel('Easting E (m)').fill('390898.4597');
    await page.getByLabel('Northing N (m)').fill('5795611.3641');
    await page.getByLabel('Ellipsoidal height h (m)').fill('95.5');
    await page.getByLabel('ζ (m)').fill('39.8');
    await page.getByLabel('u(ζ) (m)').fill('0.02');
    await page.getByLabel('Benchmark code').fill('SCL-BM1');
    await page.getByLabel('Height difference site').fill('-0.4');
    await page.getByLabel('u (m)', { exact: true }).fill('0.002');
    await screenshot(page, 'lab-site-form');
    await page.getByRole('button', { name: 'Save site' }).click();
    await page.getByTestId('site-title').waitFor();
    expect(await page.getByTestId('grs80-lat').textContent()).toContain('52.300000');
    expect(await page.getByTestId('grs80-lon').textContent()).toContain('7.400000');
    expect(await page.getByTestId('normal-height').textContent()).toContain('55.7000 m');
    await screenshot(page, 'lab-site-detail');

    // Clock with a two-row budget.
    await page.goto(`${srv.baseUrl}/clocks`);
    await page.getByRole('button', { name: 'New clock' }).click();
    await page.getByLabel('Clock name').fill('SCL-Sr3');
    await page.getByRole('combobox', { name: /^Site/ }).selectOption({ label: 'SCL field annex (SCL)' });
    await page.getByLabel('Nominal frequency').fill('429228004229873.0');
    await page.getByLabel('Correction 1').fill('4.96e-15');
    await page.getByLabel('Uncertainty 1').fill('3e-18');
    await page.getByRole('button', { name: 'Add row' }).click();
    await page.getByLabel('Effect 2').fill('Density shift');
    await page.getByLabel('Correction 2').fill('1e-18');
    await page.getByLabel('Uncertainty 2').fill('4e-18');
    expect(await page.getByTestId('budget-total-uncertainty').textContent()).toContain('5.00 × 10⁻¹⁸');
    await screenshot(page, 'lab-clock-form');
    await page.getByRole('button', { name: 'Save clock' }).click();
    await page.getByTestId('clock-title').waitFor();
    await page.getByTestId('budget-history').getByText('v1').waitFor();
    await screenshot(page, 'lab-clock-detail');

    // Fibre link from the annex to the HMO clock hall.
    await page.goto(`${srv.baseUrl}/links`);
    await page.getByRole('button', { name: 'New link' }).click();
    await page.getByLabel('Link name').fill('Annex–HMO test fibre');
    await page.getByLabel('Site A').selectOption({ label: 'SCL field annex (SCL)' });
    await page.getByLabel('Site B').selectOption({ label: 'HMO clock hall (HMO)' });
    await page.getByLabel('Fibre length (km)').fill('180');
    await page.getByLabel('Link fractional uncertainty').fill('2e-19');
    await page.getByRole('button', { name: 'Save link' }).click();
    await page.getByTestId('link-title').waitFor();
    expect(Number((await page.getByTestId('geodesic-km').textContent())!.replace(' km', ''))).toBeGreaterThan(50);
    await screenshot(page, 'lab-link-detail');

    // Campaign: default ratio 1 for the same species; then submit.
    await page.goto(`${srv.baseUrl}/campaigns`);
    await page.getByRole('button', { name: 'New campaign' }).click();
    await page.getByLabel('Campaign name').fill('Annex–HMO first run');
    await page.getByLabel('Clock A').selectOption({ label: 'SCL-Sr3 · ⁸⁷Sr 5s² ¹S₀–5s5p ³P₀' });
    await page.getByLabel('Clock B').selectOption({ label: 'HMO-Sr2 · ⁸⁷Sr 5s² ¹S₀–5s5p ³P₀ (HMO)' });
    await page.getByLabel('Fibre link joining').selectOption({ label: 'Annex–HMO test fibre' });
    await page.getByLabel('Period start').fill('2027-03-01T00:00');
    await page.getByLabel('Period end').fill('2027-03-12T00:00');
    await page.getByTestId('default-ratio').waitFor();
    expect(await page.getByTestId('default-ratio').textContent()).toContain('Default: 1,');
    await screenshot(page, 'lab-campaign-form');
    await page.getByRole('button', { name: 'Create draft' }).click();
    await page.getByTestId('campaign-title').waitFor();
    await page.getByRole('button', { name: 'Save this reference ratio' }).waitFor();
    await screenshot(page, 'lab-campaign-draft');
    await page.getByRole('button', { name: 'Submit for review…' }).click();
    // The confirmation says what will happen before anything does.
    const dialog = page.getByTestId('confirm-dialog');
    await expect(dialog.getByTestId('confirm-consequences').textContent()).resolves.toContain('coordinating institute is mailed');
    await dialog.getByRole('button', { name: 'Submit for review' }).click();
    await page.getByTestId('campaign-timeline').getByText('Submitted').waitFor();
    expect(await page.getByTestId('campaign-state').first().textContent()).toBe('Submitted');
    await screenshot(page, 'lab-campaign-submitted');

    await srv.deps.mail.flush();
    const mail = (await caughtMail()).filter((m) => m.subject.includes('Annex–HMO first run'));
    expect(mail).toHaveLength(1);
    expect(mail[0].to).toContain(srv.config.coordinatorMail);
    await context.close();
  });

  it('shows the coordinator the submitted campaign with review actions', async () => {
    const context = await browser.newContext({ viewport: { width: 1400, height: 1000 } });
    const page = await context.newPage();
    await signInWithBrowser(page, srv.baseUrl, 'ansel.brandt@geopotential-office.invalid', '/campaigns');
    await page.getByRole('link', { name: 'Annex–HMO first run' }).click();
    await page.getByRole('button', { name: 'Start review' }).waitFor();
    expect(await page.getByRole('button', { name: 'Start review' }).isEnabled()).toBe(true);
    await expect(page.getByTestId('campaign-title').textContent()).resolves.toBe('Annex–HMO first run');
    expect(await page.getByRole('button', { name: 'Accept…' }).count()).toBe(0); // accepting comes after the review starts
    await screenshot(page, 'coordinator-campaign');
    await page.goto(`${srv.baseUrl}/reference-data`);
    await page.getByTestId('reference-frequencies').getByText('from memory').first().waitFor();
    expect(await page.getByTestId('reference-frequencies').getByText('from memory').count()).toBeGreaterThan(0);
    await screenshot(page, 'coordinator-reference-data');
    await context.close();
  });
});
