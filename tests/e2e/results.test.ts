import type { Browser } from 'playwright-core';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { getCampaignForResult } from '../../server/campaigns/campaigns.service';
import { cFromNormalHeight } from '../../server/science/normal-gravity';
import { tidePotentialSeries } from '../../server/science/tides';
import { tokenFor } from '../helpers/test-app';
import { launchBrowser, screenshot, signInWithBrowser, startE2eServer, type E2eServer } from '../helpers/browser';

// Coordinator journey: open a demo campaign's results page; lab journey: the calculator and its planning view.

let srv: E2eServer;
let browser: Browser;
let campaignId: string;
const C2 = 299_792_458 ** 2;

/**
 * A demo campaign with uploaded data: an accepted SCL–HMO campaign with series if the demo seed has one, otherwise a
 * campaign made through the API as the SCL operator would, with an invented upload: y0 from the sites' registered
 * normal heights (+4e-19), the tidal signal at both clocks, white frequency noise, and a one-hour gap.
 */
async function demoCampaignWithData(): Promise<string> {
  const [seeded]: { id: string }[] = await srv.ds.query(
    "SELECT c.id FROM campaign c WHERE c.name LIKE 'SCL–HMO%' AND EXISTS (SELECT 1 FROM ratio_series s WHERE s.campaign_id = c.id) ORDER BY c.period_start LIMIT 1",
  );
  if (seeded) return seeded.id;
  const operator = await tokenFor(srv, 'ines.varga@saltmarsh-lab.invalid');
  const id = async (sql: string, v: string) => ((await srv.ds.query(sql, [v]))[0] as { id: string }).id;
  const startMs = Date.parse('2027-03-01T00:00:00Z');
  const days = 3;
  const created = await request(srv.app).post('/api/v1/campaigns').set('authorization', `Bearer ${operator}`).send({
    name: 'SCL–HMO Sr check run, March 2027', clockAId: await id('SELECT id FROM clock WHERE name = $1', 'SCL-Sr1'), clockBId: await id('SELECT id FROM clock WHERE name = $1', 'HMO-Sr2'),
    linkId: await id('SELECT id FROM fibre_link WHERE name = $1', 'SCL–HMO long-haul'), periodStart: new Date(startMs).toISOString(), periodEnd: new Date(startMs + days * 86_400_000).toISOString(),
  });
  expect(created.status, created.text).toBe(201);
  const campaign = await getCampaignForResult(srv.ds.manager, created.body.id);
  const a = campaign.clockA.site;
  const b = campaign.clockB.site;
  const y0 = (cFromNormalHeight(b.normalHeightM, b.latitudeDeg) - cFromNormalHeight(a.normalHeightM, a.latitudeDeg)) / C2 + 4e-19;
  const mjd0 = 40_587 + startMs / 86_400_000; // MJD of the Unix epoch is 40587 (common practice)
  const epochs = Float64Array.from({ length: (days * 86_400) / 15 }, (_, i) => mjd0 + (i * 15 + 7.5) / 86_400).filter((e) => e < mjd0 + 1.5 || e > mjd0 + 1.5 + 1 / 24);
  const tide = (s: typeof a) => tidePotentialSeries({ latitudeDeg: s.latitudeDeg, longitudeDeg: s.longitudeDeg, ellipsoidalHeightM: s.ellipsoidalHeightM }, epochs, { removePermanent: true });
  const wA = tide(a);
  const wB = tide(b);
  let seed = 987_654_321;
  const rnd = () => (seed = (seed * 16_807) % 2_147_483_647) / 2_147_483_647;
  const rows = ['mjd,y,flag'];
  epochs.forEach((e, i) => {
    const y = y0 + (wA[i] - wB[i]) / C2 + 2e-16 * Math.sqrt(-2 * Math.log(rnd())) * Math.cos(2 * Math.PI * rnd());
    rows.push(`${e.toFixed(9)},${y.toExponential(12)},${i % 500 === 499 ? 0 : 1}`);
  });
  const upload = await request(srv.app).post(`/api/v1/campaigns/${campaign.id}/uploads`).set('authorization', `Bearer ${operator}`)
    .field('epochColumn', '1').field('epochKind', 'mjd').field('valueColumn', '2').field('valueKind', 'offset').field('flagColumn', '3').field('hasHeader', 'true')
    .attach('file', Buffer.from(rows.join('\n') + '\n'), { filename: 'invented-check-run.csv', contentType: 'text/csv' });
  expect(upload.status, upload.text).toBe(201);
  // The coordinator sees a campaign once the lab submits it (docs/decisions/0004-campaign-visibility.md).
  const submitted = await request(srv.app).post(`/api/v1/campaigns/${campaign.id}/submit`).set('authorization', `Bearer ${operator}`).send({});
  expect(submitted.status, submitted.text).toBe(200);
  return campaign.id;
}

beforeAll(async () => {
  srv = await startE2eServer();
  browser = await launchBrowser();
  campaignId = await demoCampaignWithData();
}, 60_000);
afterAll(async () => {
  await browser?.close();
  await srv?.stop();
});

describe('results page', () => {
  it('shows the coordinator the plots, the budget, ΔC, ΔH and the Eₙ verdict', async () => {
    const context = await browser.newContext({ viewport: { width: 1280, height: 900 } });
    const page = await context.newPage();
    await signInWithBrowser(page, srv.baseUrl, 'ansel.brandt@geopotential-office.invalid', `/campaigns/${campaignId}`);
    await page.getByRole('link', { name: 'Results', exact: true }).click();
    await page.getByTestId('result-dc').waitFor({ timeout: 30_000 });
    await expect(page.getByTestId('result-dc').textContent()).resolves.toMatch(/± [\d.]+ m²\/s²/);
    await expect(page.getByTestId('result-dh').textContent()).resolves.toMatch(/± [\d.]+ m$/);
    const verdict = await page.getByTestId('agreement').textContent();
    expect(verdict).toMatch(/(Agreed|Not agreed) — Eₙ = -?\d/);
    expect(await page.getByTestId('budget-table').locator('tbody tr').count()).toBe(8); // six components, u_c and U
    await page.getByRole('img', { name: 'Fractional offset y against time, with the tide correction' }).waitFor();
    // The one-hour gap in the data breaks the mean line and the band (common practice: never draw across missing data).
    const meanPath = await page.getByTestId('y-series-mean').getAttribute('d');
    expect((meanPath ?? '').match(/M/g)?.length ?? 0).toBeGreaterThanOrEqual(2);
    await expect(page.getByTestId('agreement-difference').textContent()).resolves.toMatch(/± [\d.]+ m \(√\(U_clocks² \+ U_geodesy²\)\)$/);
    await page.getByRole('img', { name: 'Allan deviation of the tide-corrected comparison' }).waitFor();
    expect(await page.locator('[data-series="White frequency noise τ^−1/2 guide"] path').count()).toBe(1);
    await expect(page.getByRole('note').first().textContent()).resolves.toContain('Caution');
    await expect(page.getByRole('link', { name: 'Export CSV' }).getAttribute('href')).resolves.toBe(`/api/v1/campaigns/${campaignId}/result.csv`);
    await screenshot(page, 'results-coordinator');

    // Zoom into a time range by dragging across the plot: fewer buckets are drawn, the min–max band appears, the
    // range label says so; the keyboard's 0 returns to the whole series.
    const caption = page.getByTestId('y-series-caption');
    const buckets = async () => Number(/\((\d+) buckets/.exec((await caption.textContent()) ?? '')?.[1]);
    const whole = await buckets();
    expect(whole).toBeGreaterThan(20);
    expect(await page.getByTestId('y-series-band').count()).toBe(0);
    const plot = page.getByTestId('y-series-plot');
    await plot.scrollIntoViewIfNeeded();
    const box = (await plot.boundingBox())!;
    await page.mouse.move(box.x + box.width * 0.3, box.y + box.height / 2);
    await page.mouse.down();
    await page.mouse.move(box.x + box.width * 0.5, box.y + box.height / 2, { steps: 5 });
    await page.mouse.up();
    await expect(page.getByTestId('y-series-range').textContent()).resolves.toContain('(zoomed)');
    const zoomed = await buckets();
    expect(zoomed).toBeLessThan(whole * 0.4);
    expect(zoomed).toBeGreaterThanOrEqual(3);
    expect(await page.getByTestId('y-series-band').count()).toBe(1);
    await screenshot(page, 'results-plot-zoomed');
    await plot.focus();
    await page.keyboard.press('0');
    await expect(page.getByTestId('y-series-range').textContent()).resolves.toContain('(whole series)');
    expect(await buckets()).toBe(whole);
    await context.close();
  }, 60_000);

  it('shows "not computed yet", and after Compute the pending state, then the result the worker stored (the page polls)', async () => {
    const [summer] = await srv.ds.query("SELECT id FROM campaign WHERE name = 'SCL–HMO Sr summer run 2026'");
    expect((await srv.ds.query('SELECT count(*)::int AS n FROM comparison_result WHERE campaign_id = $1', [summer.id]))[0].n).toBe(0);
    const context = await browser.newContext({ viewport: { width: 1280, height: 900 } });
    const page = await context.newPage();
    await signInWithBrowser(page, srv.baseUrl, 'ansel.brandt@geopotential-office.invalid', `/campaigns/${summer.id}/results`);
    const state = page.getByTestId('result-state');
    await expect(state.getAttribute('data-state')).resolves.toBe('result-not-computed');
    await screenshot(page, 'results-not-computed');
    await page.getByRole('button', { name: 'Compute the result' }).click();
    // Queued and computed by the worker; the page shows the pending state meanwhile and asks again by itself.
    await page.getByTestId('result-dc').waitFor({ timeout: 60_000 });
    await expect(page.getByTestId('result-dc').textContent()).resolves.toMatch(/± [\d.]+ m²\/s²/);
    const [row] = await srv.ds.query('SELECT computed_by FROM comparison_result WHERE campaign_id = $1', [summer.id]);
    expect(row.computed_by).toBe('Ansel Brandt');
    await context.close();
  }, 90_000);

  it('gives lab staff the calculator with a planning curve', async () => {
    const context = await browser.newContext({ viewport: { width: 1280, height: 900 } });
    const page = await context.newPage();
    await signInWithBrowser(page, srv.baseUrl, 'ines.varga@saltmarsh-lab.invalid', '/calculator');
    await page.getByRole('form', { name: 'Redshift converter' }).getByRole('button', { name: 'Convert' }).click();
    await page.getByTestId('calc-dc').waitFor();
    // Default ratio 1 + 6.5e-17: ΔC = c²·y = 5.842 m²/s² (c exact, SI).
    await expect(page.getByTestId('calc-dc').textContent()).resolves.toContain('5.84191');
    // y = 6.5e-17 exactly for R = 1.000000000000000065 and R0 = 1; shown as ×10⁻ⁿ with its standard uncertainty.
    await expect(page.getByTestId('calc-y').textContent()).resolves.toBe('6.50000 × 10⁻¹⁷, u = 2.0 × 10⁻¹⁸');
    await page.getByRole('form', { name: 'Coordinate transformation' }).getByRole('button', { name: 'Transform' }).click();
    await expect(page.getByTestId('calc-transformed').textContent()).resolves.toMatch(/^X.* m.*Y.* m.*Z.* m$/);
    // Budget: u_c = √(1.5² + 2² + 3²)·1e-18 = 3.905e-18; ν_eff = 12·(u_c/u_1)⁴ = 551 (Welch–Satterthwaite, JCGM 100 G.2b);
    // k = t_95.45(551) = 2.00 (Table G.2 tends to 2.000).
    await page.getByRole('form', { name: 'Uncertainty budget' }).getByRole('button', { name: 'Combine' }).click();
    await expect(page.getByTestId('budget-uc').textContent()).resolves.toBe('3.91 × 10⁻¹⁸');
    await expect(page.getByTestId('budget-nu').textContent()).resolves.toMatch(/^551/);
    await expect(page.getByTestId('budget-u').textContent()).resolves.toMatch(/k = 2\.00, p = 95\.45 %, ν_eff = 551\)$/);
    await page.getByTestId('plan-floor').waitFor();
    await page.getByRole('img', { name: 'Expanded height uncertainty against averaging time' }).waitFor();
    await screenshot(page, 'calculator-operator');
    await context.close();
  }, 60_000);
});
