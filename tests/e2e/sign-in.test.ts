import type { Browser } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { launchBrowser, screenshot, signInWithBrowser, startE2eServer, type E2eServer } from '../helpers/browser';

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

const people = [
  ['operator', 'ines.varga@saltmarsh-lab.invalid', 'Ines Varga'],
  ['coordinator', 'ansel.brandt@geopotential-office.invalid', 'Ansel Brandt'],
  ['auditor', 'petra.lind@audit-bureau.invalid', 'Petra Lind'],
  ['admin', 'yusra.holm@geopotential-office.invalid', 'Yusra Holm'],
] as const;

describe('signing in through the local identity provider', () => {
  for (const [role, email, name] of people) {
    it(`lands the ${role} on their overview page`, async () => {
      const context = await browser.newContext();
      const page = await context.newPage();
      await signInWithBrowser(page, srv.baseUrl, email);
      await expect(page.getByTestId('home-title').textContent()).resolves.toContain(name);
      await screenshot(page, `home-${role}`);
      await context.close();
    });
  }

  it('shows the administrator the people table and signs out', async () => {
    const context = await browser.newContext();
    const page = await context.newPage();
    await signInWithBrowser(page, srv.baseUrl, 'yusra.holm@geopotential-office.invalid', '/admin');
    await page.getByRole('cell', { name: 'petra.lind@audit-bureau.invalid' }).waitFor();
    await screenshot(page, 'admin-people');
    await page.getByRole('button', { name: 'Sign out' }).click();
    await page.getByRole('link', { name: 'Sign in with your institute' }).waitFor();
    expect(await page.getByTestId('whoami').count()).toBe(0);
    // The session is gone on the server too, not only in the page.
    expect((await page.request.get(`${srv.baseUrl}/api/v1/me`)).status()).toBe(401);
    await context.close();
  });
});
