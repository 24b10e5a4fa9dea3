import type { Browser, Page } from 'playwright-core';
import proj4 from 'proj4';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { launchBrowser, screenshot, signInWithBrowser, startE2eServer, type E2eServer } from '../helpers/browser';
import { tokenFor } from '../helpers/test-app';

// Registry, campaign, audit-trail and admin pages as a reviewer sees them: the seeded campaign's full audit trail
// under its name, one highlighted nav entry per page, UTC minutes in the test mailbox, stated coverage factors.

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
    expect(text).toContain('Campaign opened');
    expect(text!.indexOf('Campaign opened')).toBeLessThan(text!.indexOf('State changed to submitted'));
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
    expect(body).toContain('429\u202f228\u202f004\u202f229\u202f873.7 Hz'); // CIPM 2009 Recommendation 2 ⁸⁷Sr value
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

  it('an operator edits her site: new name and coordinates, the converted GRS80 latitude follows; no edit section elsewhere', async () => {
    // A site of her own made for this check, so the seeded sites other checks read stay as they are.
    const token = await tokenFor(srv, INES);
    const created = await request(srv.app).post('/api/v1/sites').set('authorization', `Bearer ${token}`).send({
      name: 'SCL roof test pillar', referencePoint: 'Top of the roof pillar bolt', crs: 'EPSG:25832', coordinates: [500000, 5930000, 45],
      ellipsoidalHeightUncertaintyM: 0.01, quasigeoid: { source: 'entered', heightM: 39.4, uncertaintyM: 0.02 }, benchmarkTie: null,
    });
    expect(created.status).toBe(201);
    const { page, errors } = await as(INES, `/sites/${created.body.id}`);
    const before = Number((await page.getByTestId('grs80-lat').textContent())!.replace('°', ''));
    await page.getByRole('button', { name: 'Edit site' }).click();
    const form = page.getByTestId('edit-site-form');
    await form.getByLabel('Site name').fill('SCL roof pillar north');
    await form.getByLabel('Easting E (m)').fill('501000');
    await form.getByLabel('Northing N (m)').fill('5931000');
    await form.getByRole('button', { name: 'Save changes' }).click();
    await page.getByTestId('site-title').getByText('SCL roof pillar north').waitFor();
    // The entered values are named by axis, with units.
    await page.getByTestId('entered-coordinates').getByText('501000 m').waitFor();
    await page.getByText('Northing N', { exact: true }).waitFor();
    await page.getByText('5931000 m').waitFor();
    const after = Number((await page.getByTestId('grs80-lat').textContent())!.replace('°', ''));
    // Expected values from proj4 (npm reference library) with the EPSG:25832 definition, ETRS89 / UTM zone 32N
    // (GRS80 ellipsoid, central meridian 9° E, k0 = 0.9996, false easting 500 km; EPSG Geodetic Parameter Dataset).
    const utm32 = '+proj=utm +zone=32 +ellps=GRS80 +units=m +no_defs';
    const [, latBefore] = proj4(utm32, 'WGS84', [500000, 5930000]);
    const [, latAfter] = proj4(utm32, 'WGS84', [501000, 5931000]);
    expect(Math.abs(before - latBefore)).toBeLessThan(1e-8);
    expect(Math.abs(after - latAfter)).toBeLessThan(1e-8);
    // 1 km of northing is about 0.009° of latitude (one degree of meridian ≈ 111.3 km, common practice).
    expect(after - before).toBeGreaterThan(0.0085);
    expect(after - before).toBeLessThan(0.0095);
    expect(await page.getByTestId('edit-site-form').count()).toBe(0);
    await page.goto(`${srv.baseUrl}/sites`);
    await page.getByRole('link', { name: 'SCL roof pillar north' }).waitFor();
    expect(errors).toEqual([]);
    await page.goto(`${srv.baseUrl}/sites/${created.body.id}`);
    await page.getByRole('button', { name: 'Edit site' }).click();
    await screenshot(page, 'site-edit-form');
    // The section mirrors the server's rule: not on another institute's site, not for an auditor.
    const [hmo] = await srv.ds.query(`SELECT id FROM site WHERE name = 'HMO clock hall'`);
    await page.goto(`${srv.baseUrl}/sites/${hmo.id}`);
    await page.getByTestId('grs80-lat').waitFor();
    expect(await page.getByRole('button', { name: 'Edit site' }).count()).toBe(0);
    const auditor = await as(PETRA, `/sites/${hmo.id}`);
    await auditor.page.getByTestId('grs80-lat').waitFor();
    expect(await auditor.page.getByRole('button', { name: 'Edit site' }).count()).toBe(0);
  });

  it('the reference-data page groups the digits of the frequencies', async () => {
    const { page } = await as(ANSEL, '/reference-data');
    const grouped = page.getByTestId('reference-frequencies').getByText('429\u202f228\u202f004\u202f229\u202f873.7', { exact: true });
    await grouped.waitFor();
    // Digits in groups of three with narrow no-break spaces before the decimal marker (SI Brochure, 9th ed., ch. 5, from memory).
    await expect(grouped.first().textContent()).resolves.toMatch(/^\d{3}(\u202f\d{3})+\.\d$/);
    await screenshot(page, 'reference-data-fixes');
  });

  it('the test mailbox highlights only its own nav entry and shows UTC minutes', async () => {
    const token = await tokenFor(srv, INES);
    const res = await request(srv.app).post(`/api/v1/campaigns/${ids['SCL–HMO Sr run January 2027']}/submit`).set('authorization', `Bearer ${token}`).send({});
    expect(res.status).toBe(200);
    await srv.deps.mail.flush();
    const { page } = await as(YUSRA, '/admin/mailbox');
    const line = page.getByText(/^to .* · \d{4}-\d\d-\d\d \d\d:\d\d UTC$/).first();
    await line.waitFor();
    expect(await activeNav(page)).toEqual(['Test mailbox']);
    await screenshot(page, 'mailbox-fixes');
    await page.goto(`${srv.baseUrl}/admin`);
    await page.getByRole('cell', { name: PETRA }).waitFor();
    expect(await activeNav(page)).toEqual(['Institutes and people']);
  });
});
