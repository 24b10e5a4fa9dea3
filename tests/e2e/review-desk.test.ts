import { mkdirSync } from 'node:fs';
import type { Browser, Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { caughtMail } from '../helpers/test-app';
import { launchBrowser, screenshot, signInWithBrowser, startE2eServer, type E2eServer } from '../helpers/browser';

// The review desk in the browser: confirmations, checklist, comments and justification before accept, return and
// issue, the lab's mails, the campaign's audit trail; the offset plot's zoom; the map's zoom, pan and labels;
// page-not-found and the verification page.

const COORDINATOR = 'ansel.brandt@geopotential-office.invalid';
const OPERATOR = 'ines.varga@saltmarsh-lab.invalid';
const MAIL_DATE = /\d{4}-\d{2}-\d{2} \d{2}:\d{2} UTC/;

let srv: E2eServer;
let browser: Browser;
beforeAll(async () => {
  srv = await startE2eServer();
  browser = await launchBrowser();
  mkdirSync('test-results', { recursive: true });
});
afterAll(async () => {
  await browser?.close();
  await srv?.stop();
});

const idOf = async (name: string) => ((await srv.ds.query('SELECT id FROM campaign WHERE name = $1', [name])) as { id: string }[])[0].id;
async function signedIn(email: string, path: string): Promise<Page> {
  const context = await browser.newContext({ viewport: { width: 1400, height: 1000 } });
  const page = await context.newPage();
  await signInWithBrowser(page, srv.baseUrl, email, path);
  return page;
}
/**
 * The caught mails whose subject contains `subject`, once there is one (addressed to `to`, when given): the outbox
 * sends one mail per recipient, one after the other, so the first to arrive need not be the one a check is about.
 */
async function mailAbout(subject: string, to?: string) {
  let hit: Awaited<ReturnType<typeof caughtMail>> = [];
  for (let i = 0; i < 40; i++) {
    hit = (await caughtMail()).filter((m) => m.subject.includes(subject));
    if (to ? hit.some((m) => m.to.includes(to)) : hit.length) return hit;
    await new Promise((r) => setTimeout(r, 250));
  }
  return hit;
}

describe('review safeguards', () => {
  it('accepting asks for the checklist, a comment and (with exceptions) a justification, mails the lab and lands in the audit trail', async () => {
    const id = await idOf('HMO Yb⁺/Sr local ratio, October 2026');
    const page = await signedIn(COORDINATOR, `/campaigns/${id}`);
    const accept = page.getByRole('button', { name: 'Accept…' });
    await accept.waitFor();
    expect(await accept.isDisabled()).toBe(true);
    const boxes = page.getByTestId('review-checklist').getByRole('checkbox');
    expect(await boxes.count()).toBe(4);
    for (let i = 0; i < 4; i++) {
      await boxes.nth(i).click();
      await page.getByTestId('review-checklist').getByText('ticked by Ansel Brandt').nth(i).waitFor();
    }
    expect(await accept.isDisabled()).toBe(false);
    await accept.click();
    const dialog = page.getByTestId('confirm-dialog');
    await dialog.getByText('What will happen').waitFor();
    const confirm = dialog.getByRole('button', { name: /^Accept/ });
    expect(await confirm.isDisabled()).toBe(true);
    await dialog.getByLabel(/Reviewer’s comment/).fill('Ratio and budgets checked against the lab log.');
    const justification = dialog.getByLabel(/Why is it acceptable|Justification, in case/);
    if ((await dialog.getByLabel(/Why is it acceptable/).count()) > 0) expect(await confirm.isDisabled()).toBe(true);
    if ((await justification.count()) > 0) await justification.fill('Inter-species run: the reference ratio uncertainty dominates, as expected.');
    await screenshot(page, 'review-accept-dialog');
    expect(await confirm.isDisabled()).toBe(false);
    await confirm.click();
    // Accepting computes the result afresh on the server: allow for a busy machine.
    await page.getByText('Accepted by').waitFor({ timeout: 120_000 });
    await expect(page.getByText('Ratio and budgets checked against the lab log.').first().textContent()).resolves.toContain('Ratio and budgets');
    await screenshot(page, 'review-accepted');

    const mails = await mailAbout('Campaign accepted: HMO Yb⁺/Sr local ratio, October 2026', 'mira.ostrowe@highridge-obs.invalid');
    const toLab = mails.find((m) => m.to.includes('mira.ostrowe@highridge-obs.invalid'));
    expect(toLab).toBeDefined();
    expect(toLab!.text).toMatch(MAIL_DATE);

    await page.getByRole('link', { name: 'Audit trail' }).click();
    const timeline = page.getByTestId('audit-timeline');
    await timeline.getByText('State changed to accepted').waitFor();
    const numbers = (await timeline.locator('li > p:first-child > span:first-child').allTextContents()).map(Number);
    expect(numbers).toEqual(numbers.map((_, i) => i + 1));
    await timeline.getByText('Ratio series uploaded').first().waitFor();
    const [series] = await srv.ds.query('SELECT sha256 FROM ratio_series WHERE campaign_id = $1 LIMIT 1', [id]);
    await timeline.getByText(series.sha256).waitFor();
    expect(await timeline.getByText('Checklist item ticked').count()).toBe(4);
    await screenshot(page, 'review-audit-trail');
    await page.context().close();
  });

  it('returning asks for a reason in a dialog and mails it to the lab', async () => {
    const id = await idOf('SCL–HMO Sr autumn run 2026');
    const page = await signedIn(COORDINATOR, `/campaigns/${id}`);
    await page.getByRole('button', { name: 'Return to the lab…' }).click();
    const dialog = page.getByTestId('confirm-dialog');
    await expect(dialog.getByTestId('confirm-consequences').textContent()).resolves.toContain('mailed the reason');
    await dialog.getByLabel(/Reason for the lab/).fill('Day 3 of the series is missing; please upload it.');
    await dialog.getByRole('button', { name: 'Return to the lab' }).click();
    await page.getByText('Returned by the coordinating institute:').waitFor();
    const mails = await mailAbout('Campaign returned: SCL–HMO Sr autumn run 2026');
    expect(mails[0].text).toContain('Reason: Day 3 of the series is missing; please upload it.');
    expect(mails[0].text).toMatch(MAIL_DATE);
    await page.context().close();
  });

  it('issuing a certificate asks for a comment in a dialog that says what will happen, shows the worker’s progress, then the certificate', async () => {
    const id = await idOf('SCL–HMO Sr summer run 2026');
    const page = await signedIn(COORDINATOR, `/campaigns/${id}`);
    await page.getByRole('button', { name: 'Issue certificate…' }).click();
    const dialog = page.getByTestId('confirm-dialog');
    await expect(dialog.getByTestId('confirm-consequences').textContent()).resolves.toContain('signed with the institute’s key');
    await dialog.getByLabel(/Comment for the certificate/).fill('Certified after the review of 2026-07-09.');
    const why = dialog.getByLabel(/Why certify|Justification, in case/);
    if ((await why.count()) > 0) await why.fill('Demo campaign: the exception was discussed with both labs.');
    await screenshot(page, 'review-issue-dialog');
    await dialog.getByRole('button', { name: 'Issue and sign' }).click();
    // A worker renders, time-stamps and signs; the dialog shows its progress, then links to the certificate.
    const bar = dialog.getByRole('progressbar', { name: 'Issuing the certificate' });
    await bar.waitFor({ timeout: 30_000 });
    expect(Number(await bar.getAttribute('aria-valuenow'))).toBeGreaterThanOrEqual(0);
    expect(await bar.getAttribute('aria-valuetext')).toMatch(/ %$/);
    await screenshot(page, 'review-issue-progress');
    const link = dialog.getByRole('link', { name: /^certificate CL-/ });
    await link.waitFor({ timeout: 240_000 });
    expect(await bar.getAttribute('aria-valuenow')).toBe('100');
    await screenshot(page, 'review-issue-done');
    await link.click();
    await page.waitForURL(/\/certificates\/CL-/, { timeout: 30_000 });
    const number = decodeURIComponent(new URL(page.url()).pathname.split('/').pop()!);
    await page.getByTestId('certificate-number').filter({ hasText: number }).waitFor({ timeout: 30_000 });
    await screenshot(page, 'review-issue-certificate');
    const [row] = await srv.ds.query('SELECT snapshot FROM certificate WHERE number = $1', [number]);
    expect(row.snapshot.review.certificationComment).toBe('Certified after the review of 2026-07-09.');
    const mails = await mailAbout(`certificate ${number}`, OPERATOR);
    expect(mails.flatMap((m) => m.to)).toContain(OPERATOR);
    await page.context().close();
  });
});

describe('offset-over-time plot', () => {
  it('draws mean and ±1σ at full width, and zooms into a dragged range with the server’s decimation for it', async () => {
    const id = await idOf('SCL–HMO Sr spring run 2026');
    const page = await signedIn(COORDINATOR, `/campaigns/${id}`);
    const plot = page.getByTestId('time-series-plot');
    await plot.waitFor();
    await page.getByTestId('series-mean').waitFor();
    expect(await plot.getAttribute('data-zoomed')).toBe('false');
    expect(await page.getByTestId('series-extremes').count()).toBe(0);
    const panel = plot.locator('xpath=ancestor::section[1]');
    const [plotBox, panelBox] = [await plot.boundingBox(), await panel.boundingBox()];
    expect(plotBox!.width).toBeGreaterThan(panelBox!.width * 0.9);
    // Tick labels carry no spurious decimals ("1.200"): as many as the step needs, so some label ends in a non-zero digit.
    const ticks = (await plot.locator('text[data-axis="y"]').allTextContents()).filter((t) => /^[−\d.]+$/.test(t));
    const decimals = ticks.map((t) => t.split('.')[1]?.length ?? 0);
    expect(new Set(decimals).size).toBe(1);
    if (decimals[0] > 0) expect(ticks.some((t) => !t.endsWith('0'))).toBe(true);
    await plot.scrollIntoViewIfNeeded();
    await screenshot(page, 'plot-campaign-whole');
    await plot.screenshot({ path: 'test-results/campaign-plot.png' });

    const box = (await plot.boundingBox())!;
    const refetch = page.waitForRequest((r) => r.url().includes('/series?') && r.url().includes('fromMjd='));
    await page.mouse.move(box.x + box.width * 0.3, box.y + box.height * 0.5);
    await page.mouse.down();
    await page.mouse.move(box.x + box.width * 0.4, box.y + box.height * 0.5, { steps: 5 });
    await page.mouse.up();
    await refetch;
    await page.waitForFunction(() => document.querySelector('[data-testid="time-series-plot"]')?.getAttribute('data-zoomed') === 'true');
    await page.getByTestId('series-extremes').waitFor();
    await expect(page.getByTestId('plot-range').textContent()).resolves.toContain('(zoomed)');
    await page.waitForTimeout(300);
    await plot.screenshot({ path: 'test-results/campaign-plot-zoomed.png' });
    await screenshot(page, 'plot-campaign-zoomed');

    // The wheel zooms further around the pointer; "Whole series" goes back.
    const before = await page.getByTestId('plot-range').textContent();
    await page.mouse.move(box.x + box.width * 0.5, box.y + box.height * 0.5);
    await page.mouse.wheel(0, -200);
    await page.waitForFunction((b) => document.querySelector('[data-testid="plot-range"]')?.textContent !== b, before);
    await page.getByRole('button', { name: 'Whole series' }).click();
    await page.waitForFunction(() => document.querySelector('[data-testid="time-series-plot"]')?.getAttribute('data-zoomed') === 'false');
    await page.context().close();
  });
});

/** Bounding boxes of the map's labels (not the graticule's), for the overlap check. */
async function labelBoxes(page: Page) {
  return page.evaluate(() => {
    const svg = document.querySelector('[data-testid="network-map"]')!;
    const view = svg.getBoundingClientRect();
    return [...svg.querySelectorAll('g[role="button"] > text')]
      .map((t) => t.getBoundingClientRect())
      .filter((r) => r.width > 0 && r.right > view.left && r.left < view.right && r.bottom > view.top && r.top < view.bottom)
      .map((r) => ({ x: r.left, y: r.top, w: r.width, h: r.height }));
  });
}
const overlapping = (boxes: { x: number; y: number; w: number; h: number }[]) =>
  boxes.flatMap((a, i) => boxes.slice(i + 1).filter((b) => a.x < b.x + b.w - 0.5 && b.x < a.x + a.w - 0.5 && a.y < b.y + b.h - 0.5 && b.y < a.y + a.h - 0.5).map((b) => [a, b]));

describe('network map', () => {
  it('zooms and pans by wheel, drag, buttons and keys, keeps labels apart at every zoom, draws links as geodesics and refines the coast', async () => {
    const page = await signedIn(COORDINATOR, '/network/map');
    const map = page.getByTestId('network-map');
    await map.waitFor();
    await page.getByTestId('coastline').waitFor();
    await page.waitForTimeout(500);
    await screenshot(page, 'map-whole');
    expect(overlapping(await labelBoxes(page))).toEqual([]);
    // A geodesic is sampled into many segments; the old drawing was one quadratic curve.
    const d = (await page.getByTestId('link-path').first().getAttribute('d'))!;
    expect(d).not.toContain('Q');
    expect(d).toMatch(/^M[-\d.,e]+(L[-\d.,e]+)+$/);
    await page.getByText('verify against your national datum authority', { exact: false }).first().waitFor();
    expect(await page.getByTestId('site-symbol').count()).toBeGreaterThan(0);

    const zoom = async () => Number(await map.getAttribute('data-zoom'));
    await page.getByRole('button', { name: 'Zoom in' }).click();
    expect(await zoom()).toBeCloseTo(1.5, 5);
    const box = (await map.boundingBox())!;
    const siteX = async () => Number(await page.getByTestId('site-symbol').first().getAttribute('cx'));
    const x0 = await siteX();
    await page.mouse.move(box.x + box.width * 0.5, box.y + box.height * 0.5);
    await page.mouse.down();
    await page.mouse.move(box.x + box.width * 0.5 + 120, box.y + box.height * 0.5, { steps: 6 });
    await page.mouse.up();
    expect(await siteX()).toBeGreaterThan(x0 + 50);
    // Back to the fitted view, then wheel-zoom onto the first clock site: it stays under the pointer.
    await page.getByRole('button', { name: 'Fit the network' }).click();
    const site = (await page.getByTestId('site-symbol').first().boundingBox())!;
    await page.mouse.move(site.x + site.width / 2, site.y + site.height / 2);
    for (let i = 0; i < 5; i++) {
      await page.mouse.wheel(0, -120);
      await page.waitForTimeout(100);
    }
    await page.waitForFunction(() => Number(document.querySelector('[data-testid="network-map"]')?.getAttribute('data-zoom')) > 3);
    await map.focus();
    await page.keyboard.press('+');
    expect(await zoom()).toBeGreaterThan(4);
    await page.waitForFunction(() => document.querySelector('[data-testid="network-map"]')?.getAttribute('data-coast') === '10m', undefined, { timeout: 60_000 });
    await page.waitForTimeout(500);
    expect(overlapping(await labelBoxes(page))).toEqual([]);
    await screenshot(page, 'map-zoomed');
    await page.keyboard.press('0');
    expect(await zoom()).toBe(1);
    await page.context().close();
  });
});

describe('navigation', () => {
  it('an unknown address shows page-not-found, with no request for it and no notices', async () => {
    const page = await signedIn(OPERATOR, '/sites');
    const requested: string[] = [];
    page.on('request', (r) => { if (r.url().includes('/api/v1/sites/new')) requested.push(r.url()); });
    await page.goto(`${srv.baseUrl}/sites/new`);
    await page.getByRole('heading', { name: 'Page not found' }).waitFor();
    await page.waitForTimeout(800);
    expect(requested).toEqual([]);
    expect(await page.getByText('Problem:').count()).toBe(0);
    await expect(page.getByTestId('not-found').textContent()).resolves.toContain('/sites/new');
    await screenshot(page, 'nav-not-found');
    await page.context().close();
  });

  it('the verification page keeps the signed-in frame, and calls a file with bytes appended "changed after signing"', async () => {
    const page = await signedIn(OPERATOR, '/');
    await page.goto(`${srv.baseUrl}/verify`);
    await page.getByRole('heading', { name: 'Check a certificate' }).waitFor();
    await expect(page.getByTestId('whoami').textContent()).resolves.toBe('Ines Varga');
    expect(await page.getByRole('link', { name: 'Sign in →' }).count()).toBe(0);
    const [{ number, pdf }] = await srv.ds.query(`SELECT number, pdf FROM certificate ORDER BY issued_at LIMIT 1`);
    await page.getByTestId('verify-file').setInputFiles({ name: `${number}.pdf`, mimeType: 'application/pdf', buffer: Buffer.concat([pdf, Buffer.from('\n% appended\n')]) });
    await page.getByRole('button', { name: 'Check the file' }).click();
    await expect(page.getByTestId('verify-verdict').textContent()).resolves.toBe('Changed after signing');
    await expect(page.getByTestId('verify-result').textContent()).resolves.toMatch(/changed after signing/i);
    await screenshot(page, 'nav-verify-signed-in');
    await page.context().close();
  });
});
