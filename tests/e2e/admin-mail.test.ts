import type { Browser } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { launchBrowser, screenshot, signInWithBrowser, startE2eServer, type E2eServer } from '../helpers/browser';

// The administrator sees a message the outbox gave up on and sends it again from the Administration page.
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

describe('outgoing mail on the administration page', () => {
  it('lists a dead letter with its last error and sends it again', async () => {
    const [row] = await srv.ds.query(
      `INSERT INTO mail_outbox (to_address, subject, text_body, state, attempts, last_error, dead_at)
       VALUES ('review-desk@geopotential-office.invalid', 'Campaign submitted for review', 'text', 'dead', 41, 'connect ECONNREFUSED 127.0.0.1:2525', now())
       RETURNING id`,
    );
    const context = await browser.newContext();
    const page = await context.newPage();
    await signInWithBrowser(page, srv.baseUrl, 'yusra.holm@geopotential-office.invalid', '/admin');
    await page.getByRole('heading', { name: 'Outgoing mail' }).waitFor();
    await page.getByRole('tab', { name: 'Given up (1)' }).waitFor();
    await page.getByRole('cell', { name: 'Campaign submitted for review' }).waitFor();
    await page.getByRole('cell', { name: 'connect ECONNREFUSED 127.0.0.1:2525' }).waitFor();
    await screenshot(page, 'admin-mail-dead-letter');
    await page.getByRole('button', { name: 'Send again' }).click();
    await page.getByRole('tab', { name: 'Given up (0)' }).waitFor();
    const [after] = await srv.ds.query(`SELECT state FROM mail_outbox WHERE id = $1`, [row.id]);
    expect(['pending', 'sent']).toContain(after.state);
    await context.close();
  });
});
