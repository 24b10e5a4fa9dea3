import type { Browser } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { launchBrowser, screenshot, signInWithBrowser, startE2eServer, type E2eServer } from '../helpers/browser';

// Transportable clocks in the browser: lab staff register a transportable clock of their institute, record a
// deployment and open a side-by-side campaign with an entered local tie; the coordinator opens NGCO-TSr1's timeline.

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

describe('deployments and side-by-side campaigns', () => {
  it('lab staff register a transportable clock, add a deployment and create a side-by-side campaign', async () => {
    const context = await browser.newContext({ viewport: { width: 1400, height: 1000 } });
    const page = await context.newPage();
    await signInWithBrowser(page, srv.baseUrl, 'ines.varga@saltmarsh-lab.invalid', '/clocks');
    await page.getByRole('button', { name: 'New clock' }).click();
    await page.getByLabel('Clock name').fill('SCL-TSr2');
    await page.getByRole('combobox', { name: /^Site/ }).selectOption({ label: 'SCL clock hall (SCL)' });
    await page.getByLabel('Nominal frequency').fill('429228004229873.7');
    await page.getByLabel('Correction 1').fill('4.95e-15');
    await page.getByLabel('Uncertainty 1').fill('3e-18');
    await page.getByTestId('clock-mobility').selectOption('transportable');
    await page.getByRole('button', { name: 'Save clock' }).click();
    await page.getByTestId('clock-title').waitFor();
    expect(await page.getByTestId('clock-mobility-fact').textContent()).toContain('Transportable');

    await page.getByTestId('add-deployment').click();
    await page.getByTestId('deployment-site').selectOption({ label: 'SCL trailer bay (SCL)' });
    await page.getByTestId('deployment-arrived').fill('2027-04-01T08:00');
    await page.getByTestId('deployment-departed').fill('2027-04-30T08:00');
    await page.getByLabel('Note').fill('Set up in the trailer bay for a first calibration');
    await screenshot(page, 'deployments-form');
    await page.getByTestId('save-deployment').click();
    await page.getByTestId('deployments-table').getByText('SCL trailer bay').waitFor();
    await page.getByTestId('deployment-timeline').waitFor();
    await screenshot(page, 'deployments-lab-clock');

    // An overlapping deployment is refused with the server's reason on the form.
    await page.getByTestId('add-deployment').click();
    await page.getByTestId('deployment-site').selectOption({ label: 'Harbour Light tide-gauge station (NGCO)' });
    await page.getByTestId('deployment-arrived').fill('2027-04-20T08:00');
    await page.getByTestId('save-deployment').click();
    await page.getByTestId('deployment-form').getByText(/overlaps/).first().waitFor();
    await page.getByRole('button', { name: 'Cancel' }).click();

    await page.goto(`${srv.baseUrl}/campaigns`);
    await page.getByRole('button', { name: 'New campaign' }).click();
    await page.getByLabel('Campaign name').fill('SCL-TSr2 side by side, April 2027');
    await page.getByLabel('Clock A').selectOption({ label: 'SCL-Sr1 · ⁸⁷Sr 5s² ¹S₀–5s5p ³P₀' });
    await page.getByLabel('Clock B').selectOption({ label: 'SCL-TSr2 · ⁸⁷Sr 5s² ¹S₀–5s5p ³P₀ (SCL)' });
    await page.getByLabel('Fibre link joining').selectOption({ label: 'SCL hall–trailer bay' });
    await page.getByLabel('Period start').fill('2027-04-05T00:00');
    await page.getByLabel('Period end').fill('2027-04-15T00:00');
    await page.getByTestId('campaign-role').selectOption('side-by-side');
    await page.getByTestId('local-tie-kind').selectOption('entered');
    await page.getByTestId('tie-delta-c').fill('-4.121');
    await page.getByTestId('tie-u').fill('0.03');
    await page.getByTestId('tie-source').fill('Levelling note 27-03 of the SCL survey team');
    await screenshot(page, 'deployments-campaign-form');
    await page.getByRole('button', { name: 'Create draft' }).click();
    await page.getByTestId('campaign-title').waitFor();
    expect(await page.getByTestId('campaign-role-fact').textContent()).toContain('Side by side');
    expect(await page.getByTestId('site-b').textContent()).toBe('SCL trailer bay');
    expect(await page.getByTestId('site-a').textContent()).toBe('SCL clock hall');
    expect(await page.getByTestId('local-tie').textContent()).toContain('-4.1210 m²/s² ± 0.0300 m²/s²');
    await screenshot(page, 'deployments-campaign-draft');
    await context.close();
  });

  it('the coordinator opens NGCO-TSr1’s deployment timeline and the Harbour Light site', async () => {
    const context = await browser.newContext({ viewport: { width: 1400, height: 1000 } });
    const page = await context.newPage();
    await signInWithBrowser(page, srv.baseUrl, 'ansel.brandt@geopotential-office.invalid', '/clocks');
    await page.getByRole('link', { name: 'NGCO-TSr1' }).click();
    await page.getByTestId('deployment-timeline').waitFor();
    const rows = page.getByTestId('deployments-table').locator('tbody tr');
    expect(await rows.count()).toBe(3);
    expect(await rows.nth(1).textContent()).toContain('Harbour Light tide-gauge station');
    expect(await rows.nth(2).textContent()).toContain('still there');
    await page.getByTestId('add-deployment').waitFor(); // the coordinator may record deployments
    await screenshot(page, 'deployments-coordinator-timeline');
    await rows.nth(1).getByRole('link', { name: 'Harbour Light tide-gauge station' }).click();
    await page.getByTestId('site-clock-visits').getByText('NGCO-TSr1').waitFor();
    await screenshot(page, 'deployments-site-visits');
    await context.close();
  });
});
