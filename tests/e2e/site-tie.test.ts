import type { Browser } from 'playwright-core';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { launchBrowser, screenshot, signInWithBrowser, startE2eServer, type E2eServer } from '../helpers/browser';
import { tokenFor } from '../helpers/test-app';

// A new site is tied to a benchmark from its own page with a tie given as ΔC (m²/s²), σ and a source.

const INES = 'ines.varga@saltmarsh-lab.invalid';
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

describe('site page: local tie', () => {
  it('an operator ties her new site to a benchmark with ΔC, σ and source; the page and the database show it', async () => {
    const token = await tokenFor(srv, INES);
    const created = await request(srv.app).post('/api/v1/sites').set('authorization', `Bearer ${token}`).send({
      name: 'SCL tie test pillar', referencePoint: 'Centre of the pillar plate', crs: 'EPSG:25832', coordinates: [501200, 5931400, 44],
      ellipsoidalHeightUncertaintyM: 0.01, quasigeoid: { source: 'entered', heightM: 39.4, uncertaintyM: 0.02 }, benchmarkTie: null,
    });
    expect(created.status).toBe(201);
    const context = await browser.newContext({ viewport: { width: 1280, height: 900 } });
    const page = await context.newPage();
    await signInWithBrowser(page, srv.baseUrl, INES, `/sites/${created.body.id}`);
    await page.getByTestId('no-tie').waitFor();
    await page.getByRole('button', { name: 'Tie to a benchmark…' }).click();
    const form = page.getByTestId('tie-form');
    const select = form.locator('select').first();
    await select.locator('option').nth(1).waitFor({ state: 'attached' });
    const code = (await select.locator('option').nth(1).getAttribute('value'))!;
    await select.selectOption(code);
    await page.getByTestId('tie-quantity').selectOption('potential');
    await page.getByTestId('tie-value').fill('-3.4521');
    await page.getByTestId('tie-u').fill('0.015');
    const save = form.getByRole('button', { name: 'Save the tie' });
    expect(await save.isDisabled()).toBe(true); // a ΔC tie names its source
    await page.getByTestId('tie-source').fill('Tie survey SCL-2026-07, sheet 2');
    await screenshot(page, 'site-tie-form-delta-c');
    await save.click();
    await page.getByText('Geopotential-number difference ΔC = C(site) − C(benchmark)').waitFor();
    const text = (await page.locator('main').textContent())!;
    expect(text).toContain('-3.4521 m²/s²');
    expect(text).toContain('0.0150 m²/s² (k = 1)');
    expect(text).toContain('Tie survey SCL-2026-07, sheet 2');
    await screenshot(page, 'site-tie-delta-c');
    const [row] = await srv.ds.query('SELECT benchmark_code AS bm, tie_delta_c_m2s2 AS dc, tie_u_c_m2s2 AS uc, tie_source AS src, tie_height_difference_m AS dh FROM site WHERE id = $1', [created.body.id]);
    expect(row).toEqual({ bm: code, dc: -3.4521, uc: 0.015, src: 'Tie survey SCL-2026-07, sheet 2', dh: null });
    await context.close();
  });
});
