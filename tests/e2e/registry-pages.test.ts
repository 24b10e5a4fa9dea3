import type { Browser, Page } from 'playwright-core';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { launchBrowser, screenshot, signInWithBrowser, startE2eServer, type E2eServer } from '../helpers/browser';
import { tokenFor } from '../helpers/test-app';

// Registry, campaign, audit-trail and admin pages as a reviewer sees them: the seeded campaign's full audit trail
// under its name, one highlighted nav entry per page, UTC minutes in the mail catcher, stated coverage factors.

const INES = 'ines.varga@saltmarsh-lab.invalid';
const ANSEL = 'ansel.brandt@geopotential-office.invalid';
const PETRA = 'petra.lind@audit-bureau.invalid';
const YUSRA = 'yusra.holm@geopotential-office.invalid';

let srv: E2eServer;
let browser: Browser;
let ids: Record<string, string> = {};
beforeAll(async () => {
  srv = await startE2eServer();
  browser = await launchBrowser();
  const rows: { name: string; id: string }[] = await srv.ds.query('SELECT name, id FROM campaign UNION ALL SELECT name, id FROM fibre_link');
  ids = Object.fromEntries(rows.map((r) => [r.name, r.id]));
});
afterAll(async () => {
  await browser?.close();
  await srv?.stop();
});

async function as(email: string, path: string): Promise<{ page: Page; errors: string[] }> {
  const context = await browser.newContext({ viewport: { width: 1280, height: 900 } });
  const page = await context.newPage();
  const errors: string[] = [];
  // The browser's own network log ("Failed to load resource") is not the app's doing; app code must not console.error.
  page.on('console', (m) => { if (m.type() === 'error' && !m.text().startsWith('Failed to load resource')) errors.push(m.text()); });
  await signInWithBrowser(page, srv.baseUrl, email, path);
  return { page, errors };
}
const activeNav = (page: Page) => page.locator('nav[aria-label="Main"] a.bg-ink-600').allTextContents();

describe('registry and campaign pages', () => {
  it('the audit trail of the seeded spring run starts with its creation and is titled with its name', async () => {
    const id = ids['SCL–HMO Sr spring run 2026'];
    const { page, errors } = await as(PETRA, `/audit/campaigns/${id}`);
    await page.getByRole('heading', { name: 'Audit trail: SCL–HMO Sr spring run 2026' }).waitFor();
    const timeline = page.getByTestId('audit-timeline');
    await timeline.getByText('accepted').first().waitFor();
    const text = await timeline.textContent();
    expect(text).toContain('created');
    expect(text!.indexOf('created')).toBeLessThan(text!.indexOf('submitted'));
    expect(text).toContain('2026-02-20 09:12 UTC');
    expect(text).not.toContain('pdfSha256');
    await expect(page.locator('header p').first().textContent()).resolves.toBe('Campaigns / SCL–HMO Sr spring run 2026 / audit trail');
    expect(await activeNav(page)).toEqual([]);
    expect(errors).toEqual([]);
    await screenshot(page, 'audit-trail-campaign');
  });

  it('a campaign page: grouped nominal frequency, standard uncertainties with k, exact same-species ratio, seeded date', async () => {
    const { page } = await as(INES, `/campaigns/${ids['SCL–HMO Sr spring run 2026']}`);
    await page.getByText('Opened by').waitFor();
    const body = (await page.locator('main').textContent())!;
    expect(body).toContain('429\u202f228\u202f004\u202f229\u202f873.7 Hz'); // CIPM 2009 ⁸⁷Sr value, references.md §7
    expect(body).toContain('exact (same species: R₀ = 1)');
    expect(body).toMatch(/standard uncertainty u = [\d.]+ × 10⁻¹⁸ \(k = 1\)/);
    expect(body).toContain('Ines Varga, 2026-02-20');
    expect(await activeNav(page)).toEqual(['Campaigns']);
    await screenshot(page, 'campaign-detail-fixes');
  });

  it('the sites list says which uncertainty; the links list and detail give the fibre length alike; pager buttons disabled', async () => {
    const { page } = await as(INES, '/sites');
    await page.getByRole('columnheader', { name: /standard uncertainty, k = 1/ }).waitFor();
    expect(await page.getByRole('button', { name: 'Next' }).isDisabled()).toBe(true);
    await screenshot(page, 'sites-list-fixes');
    await page.goto(`${srv.baseUrl}/links`);
    await page.getByRole('cell', { name: '0.420', exact: true }).waitFor();
    await screenshot(page, 'links-list-fixes');
    await page.goto(`${srv.baseUrl}/links/${ids['HMO local']}`);
    await page.getByText('0.420 km', { exact: true }).waitFor();
    expect(await activeNav(page)).toEqual(['Fibre links']);
  });

  it('the reference-data page groups the digits of the frequencies', async () => {
    const { page } = await as(ANSEL, '/reference-data');
    await page.getByTestId('reference-frequencies').getByText('429\u202f228\u202f004\u202f229\u202f873.7', { exact: true }).waitFor();
    await screenshot(page, 'reference-data-fixes');
  });

  it('the mail catcher highlights only its own nav entry and shows UTC minutes', async () => {
    const token = await tokenFor(srv, INES);
    const res = await request(srv.app).post(`/api/v1/campaigns/${ids['SCL–HMO Sr run January 2027']}/submit`).set('authorization', `Bearer ${token}`).send({});
    expect(res.status).toBe(200);
    await srv.deps.mail.flush();
    const { page } = await as(YUSRA, '/admin/mailbox');
    const line = page.getByText(/^to .* · \d{4}-\d\d-\d\d \d\d:\d\d UTC$/).first();
    await line.waitFor();
    expect(await activeNav(page)).toEqual(['Mail catcher']);
    await screenshot(page, 'mailbox-fixes');
    await page.goto(`${srv.baseUrl}/admin`);
    await page.getByRole('cell', { name: PETRA }).waitFor();
    expect(await activeNav(page)).toEqual(['Institutes and people']);
  });
});
