import type { Browser, BrowserContext, Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { UserEntity } from '../../server/db/entities/core.entities';
import { launchBrowser, screenshot, signInWithBrowser, startE2eServer, type E2eServer } from '../helpers/browser';
import { tokenFor } from '../helpers/test-app';

// The administrator's pages: register and edit institutes, change a role, deactivate and reactivate a person,
// and end anyone's session or revoke anyone's token — each checked in the database as well as on the page.

const INES = 'ines.varga@saltmarsh-lab.invalid';
const PETRA = 'petra.lind@audit-bureau.invalid';
const YUSRA = 'yusra.holm@geopotential-office.invalid';

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

async function as(email: string, path: string): Promise<{ page: Page; context: BrowserContext; errors: string[] }> {
  const context = await browser.newContext({ viewport: { width: 1280, height: 900 } });
  const page = await context.newPage();
  const errors: string[] = [];
  page.on('console', (m) => { if (m.type() === 'error' && !m.text().startsWith('Failed to load resource')) errors.push(m.text()); });
  try {
    await signInWithBrowser(page, srv.baseUrl, email, path);
  } catch (e) {
    await screenshot(page, `admin-signin-failed-${email.split('@')[0]}`);
    throw new Error(`sign-in as ${email} failed at ${page.url()}: ${(await page.textContent('body'))?.slice(0, 300)}`, { cause: e });
  }
  return { page, context, errors };
}
const user = (email: string) => srv.ds.getRepository(UserEntity).findOneByOrFail({ email });

describe('administration pages', () => {
  it('registers and edits an institute', async () => {
    const { page, context, errors } = await as(YUSRA, '/admin');
    await page.getByRole('button', { name: 'Register an institute' }).click();
    const add = page.getByRole('region', { name: 'New institute' });
    await add.getByLabel('Code').fill('tide-lab');
    await add.getByLabel('Name').fill('Tidewater Time Laboratory');
    await add.getByLabel('City').fill('Larkspur Bay');
    await screenshot(page, 'admin-institute-new');
    await add.getByRole('button', { name: 'Register', exact: true }).click();
    await page.getByTestId('institutes').getByRole('cell', { name: 'TIDE-LAB', exact: true }).waitFor();
    const [row]: { name: string; city: string; kind: string }[] = await srv.ds.query("SELECT name, city, kind FROM institute WHERE code = 'TIDE-LAB'");
    expect(row).toEqual({ name: 'Tidewater Time Laboratory', city: 'Larkspur Bay', kind: 'laboratory' });

    await page.getByRole('button', { name: 'Edit TIDE-LAB' }).click();
    const edit = page.getByRole('region', { name: 'Editing TIDE-LAB' });
    await edit.getByLabel('City').fill('Larkspur Harbour');
    await edit.getByLabel('Kind').selectOption('other');
    await screenshot(page, 'admin-institute-edit');
    await edit.getByRole('button', { name: 'Save' }).click();
    await page.getByRole('cell', { name: 'Larkspur Harbour' }).waitFor();
    const [edited]: { city: string; kind: string }[] = await srv.ds.query("SELECT city, kind FROM institute WHERE code = 'TIDE-LAB'");
    expect(edited).toEqual({ city: 'Larkspur Harbour', kind: 'other' });
    await screenshot(page, 'admin-institutes');
    expect(errors).toEqual([]);
    await context.close();
  });

  it('changes a role, and deactivates and reactivates a person whose browser is signed in', async () => {
    const ines = await as(INES, '/');
    const { page, context, errors } = await as(YUSRA, '/admin');

    await page.getByLabel('Role of Petra Lind').selectOption('coordinator');
    await expect.poll(async () => (await user(PETRA)).role).toBe('coordinator');

    const row = page.getByRole('row', { name: /Ines Varga/ });
    await row.getByRole('button', { name: 'Deactivate…' }).click();
    const confirm = page.getByRole('group', { name: 'Deactivate Ines Varga' });
    await expect(confirm.textContent()).resolves.toContain('sessions end');
    await screenshot(page, 'admin-deactivate-confirm');
    await confirm.getByRole('button', { name: 'Deactivate', exact: true }).click();
    await row.getByText(/^deactivated \d{4}-\d{2}-\d{2}$/).waitFor();
    expect((await user(INES)).deactivatedAt).toBeInstanceOf(Date);
    await screenshot(page, 'admin-people');

    // Ines's open browser is signed out at its next request, and signing in again is refused.
    await ines.page.reload();
    await ines.page.getByRole('link', { name: 'Sign in with your institute' }).waitFor();
    await ines.page.getByRole('link', { name: 'Sign in with your institute' }).click();
    await ines.page.locator(`button[data-email="${INES}"]`).click();
    await ines.page.waitForURL((u) => u.origin === srv.baseUrl);
    await expect(ines.page.textContent('body')).resolves.toContain('Sign-in failed.');
    await expect(ines.page.textContent('body')).resolves.not.toMatch(/deactivated|InResponseTo|signature/i);

    await row.getByRole('button', { name: 'Reactivate' }).click();
    await expect.poll(async () => (await user(INES)).deactivatedAt).toBeNull();
    await page.getByLabel('Role of Petra Lind').selectOption('auditor');
    await expect.poll(async () => (await user(PETRA)).role).toBe('auditor');
    expect(errors).toEqual([]);
    await context.close();
    await ines.context.close();
  });

  it("lists everyone's sessions and tokens, ends a session and revokes a token", async () => {
    const secret = await tokenFor(srv, PETRA);
    const petra = await as(PETRA, '/');
    const petraId = (await user(PETRA)).id;
    const { page, context, errors } = await as(YUSRA, '/admin');
    await page.getByRole('row', { name: /Petra Lind/ }).getByRole('link', { name: 'Sessions and tokens' }).click();
    await page.getByRole('heading', { name: 'Open sessions of Petra Lind' }).waitFor();
    await page.getByTestId('tokens').getByRole('cell', { name: 'test', exact: true }).waitFor();
    await screenshot(page, 'admin-access');

    const sessions = page.getByTestId('sessions').getByRole('button', { name: 'End session' });
    const n = await sessions.count();
    expect(n).toBeGreaterThanOrEqual(1);
    for (let i = 0; i < n; i++) await sessions.first().click().then(() => page.waitForResponse((r) => r.url().includes('/api/v1/admin/sessions') && r.request().method() === 'GET'));
    await page.getByText('No open sessions').waitFor();
    const left: unknown[] = await srv.ds.query(`SELECT 1 FROM "session" WHERE sess -> 'passport' ->> 'user' = $1`, [petraId]);
    expect(left).toHaveLength(0);
    await petra.page.reload();
    await petra.page.getByRole('link', { name: 'Sign in with your institute' }).waitFor();

    await page.getByTestId('tokens').getByRole('button', { name: 'Revoke' }).first().click();
    await page.getByText('No active tokens').waitFor();
    const res = await fetch(`${srv.baseUrl}/api/v1/me`, { headers: { authorization: `Bearer ${secret}` } });
    expect(res.status).toBe(401);
    await page.getByLabel('only active').uncheck();
    await page.getByTestId('tokens').getByText(/^revoked \d{4}-\d{2}-\d{2} \d{2}:\d{2} UTC$/).first().waitFor();
    await screenshot(page, 'admin-access-after');

    // A token's lifetime is chosen when it is made.
    await page.goto(`${srv.baseUrl}/account/tokens`);
    await page.getByLabel('What is it for?').fill('nightly export');
    await page.getByLabel('Valid for').selectOption('30');
    await page.getByRole('button', { name: 'Create token' }).click();
    await page.getByTestId('new-token').waitFor();
    const expires = new Date(Date.now() + 30 * 86_400_000).toISOString().slice(0, 10);
    await page.getByRole('row', { name: /nightly export/ }).getByRole('cell', { name: expires }).waitFor();
    const [made]: { days: number }[] = await srv.ds.query("SELECT round(extract(epoch FROM expires_at - created_at) / 86400)::int AS days FROM api_token WHERE name = 'nightly export'");
    expect(made.days).toBe(30);
    await screenshot(page, 'account-tokens');

    await page.goto(`${srv.baseUrl}/`);
    await page.getByRole('link', { name: 'Open sessions and tokens' }).waitFor();
    await screenshot(page, 'home-admin-cards');
    expect(errors).toEqual([]);
    await context.close();
    await petra.context.close();
  });
});
