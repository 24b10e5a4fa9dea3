import type { Browser } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { launchBrowser, screenshot, signInWithBrowser, startE2eServer, type E2eServer } from '../helpers/browser';

// The coordinator opens the clock-ratio closures table of the network and the demo loop's closure.

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

describe('clock-ratio closures', () => {
  it('the coordinator opens the closures table and the demo closure', async () => {
    const context = await browser.newContext({ viewport: { width: 1400, height: 1000 } });
    const page = await context.newPage();
    await signInWithBrowser(page, srv.baseUrl, 'ansel.brandt@geopotential-office.invalid', '/network/closures');
    await page.getByRole('heading', { name: 'Clock-ratio closures' }).waitFor();
    const row = page.getByTestId('closure-row').filter({ hasText: 'HMO-Sr2 → HMO-YbIon → SCL-Sr1 → HMO-Sr2' });
    await row.waitFor();
    expect(await row.textContent()).toContain('✓ closes');
    expect(await row.getAttribute('data-agreed')).toBe('true');
    await screenshot(page, 'closures-table');
    await row.getByRole('link').click();
    await page.getByTestId('closure-verdict').waitFor();
    const verdict = (await page.getByTestId('closure-verdict').textContent()) ?? '';
    expect(verdict).toContain('The loop closes');
    expect(verdict).toMatch(/k = 2\.\d\d/);
    await page.getByRole('cell', { name: '0 (cancels)' }).first().waitFor();
    await screenshot(page, 'closure-detail');
    await context.close();
  }, 120_000);
});
