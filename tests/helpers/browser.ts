import type { Server } from 'node:http';
import pino from 'pino';
import { chromium, type Browser, type Page } from 'playwright-core';
// @ts-expect-error plain ESM helper shared with `npm start`
import { freePort } from '../../scripts/lib/postgres.mjs';
import { startWorker } from '../../server/jobs/worker';
import { createTestApp, type TestApp } from './test-app';

// Browser tests: the real app on a loopback port, driven by Debian's Chromium through playwright-core.
export const chromiumArgs = ['--headless', '--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run',
  '--disable-background-networking', '--disable-component-update', '--disable-sync'];

export async function launchBrowser(): Promise<Browser> {
  return chromium.launch({ executablePath: '/usr/bin/chromium', args: chromiumArgs, headless: true });
}

export type E2eServer = TestApp & { baseUrl: string; server: Server; stop: () => Promise<void> };

export async function startE2eServer(): Promise<E2eServer> {
  const port: number = await freePort();
  const baseUrl = `http://127.0.0.1:${port}`;
  // E2E_LOG=1 shows the server's log (security events included) on stderr while a browser test runs.
  const logger = process.env.E2E_LOG === '1' ? pino({ level: 'info' }, pino.destination(2)) : undefined;
  const t = await createTestApp({ env: { PUBLIC_URL: baseUrl, PORT: String(port) }, logger });
  t.deps.mail.start(500);
  // as `npm start` does: one job worker in the process (result computations, adjustment runs)
  const worker = await startWorker({ dataSource: t.ds, databaseUrl: t.databaseUrl, config: t.config, pollingIntervalSeconds: 0.5 });
  const server: Server = await new Promise((resolve) => {
    const s = t.app.listen(port, '127.0.0.1', () => resolve(s));
  });
  return {
    ...t, baseUrl, server,
    stop: async () => {
      await new Promise<void>((r) => server.close(() => r()));
      await worker.stop();
      await t.close();
    },
  };
}

/** Signs in as a demo person through the local identity provider's page, as a person would. */
export async function signInWithBrowser(page: Page, baseUrl: string, email: string, path = '/') {
  await page.goto(`${baseUrl}${path}`);
  await page.getByRole('link', { name: 'Sign in with your institute' }).click();
  await page.locator(`button[data-email="${email}"]`).click();
  await page.waitForURL((u) => u.origin === baseUrl);
  await page.getByTestId('whoami').waitFor();
}

export async function screenshot(page: Page, name: string) {
  await page.screenshot({ path: `test-results/${name}.png`, fullPage: true });
}
