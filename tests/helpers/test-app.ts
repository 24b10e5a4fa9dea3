import crypto from 'node:crypto';
import pino from 'pino';
import request from 'supertest';
import type { DataSource } from 'typeorm';
import { inject } from 'vitest';
import { createApp } from '../../server/app';
import { loadConfig, type AppConfig } from '../../server/config';
import { openDatabase } from '../../server/db/data-source';
import type { AppDeps } from '../../server/deps';
import { stopQueues } from '../../server/jobs/queue';
import { startWorker, type Worker } from '../../server/jobs/worker';
import { createMailSender } from '../../server/mail/outbox';
import { issueToken } from '../../server/tokens/tokens.service';
import { UserEntity } from '../../server/db/entities/core.entities';
import { seedDemo } from '../../seeds/demo';
// @ts-expect-error plain ESM helper shared with `npm start`
import { APP_ROLE, OWNER_ROLE, urlAsRole } from '../../scripts/lib/postgres.mjs';

export type TestApp = {
  app: ReturnType<typeof createApp>;
  ds: DataSource;
  deps: AppDeps;
  config: AppConfig;
  /** the restricted application role's URL (what the app under test uses) */
  databaseUrl: string;
  /** the owner role's URL for this database (migrations; tests that tamper with the audit trail) */
  ownerUrl: string;
  /** Starts one in-process job worker for this app (once; stopped by close), as `npm start` runs one beside the HTTP process. */
  startJobs: () => Promise<void>;
  close: () => Promise<void>;
};

/** A fresh database cloned from the migrated template, with the demo people (and feature seeds when asked). */
export async function createTestApp(
  opts: { seed?: boolean; env?: Record<string, string>; logger?: pino.Logger; /** reuse this database (an app restart) instead of a fresh clone */ databaseUrl?: string } = {},
): Promise<TestApp> {
  const adminUrl = inject('pgAdminUrl');
  let databaseUrl = opts.databaseUrl;
  let ownerUrl: string;
  if (!databaseUrl) {
    const name = `t_${crypto.randomBytes(6).toString('hex')}`;
    const admin = await openDatabase(adminUrl, { migrate: false });
    await admin.query(`CREATE DATABASE ${name} OWNER ${OWNER_ROLE} TEMPLATE ${inject('templateDb')}`);
    await admin.destroy();
    // The app under test connects as the restricted application role, never as the superuser (see roles.ts).
    ownerUrl = urlAsRole(adminUrl.replace(/\/[^/]*$/, `/${name}`), OWNER_ROLE) as string;
    databaseUrl = urlAsRole(ownerUrl, APP_ROLE) as string;
  } else {
    ownerUrl = urlAsRole(databaseUrl, OWNER_ROLE) as string;
  }
  const config = loadConfig({
    NODE_ENV: 'test',
    DATABASE_URL: databaseUrl,
    PUBLIC_URL: 'http://127.0.0.1:8080',
    SECRETS_DIR: inject('secretsDir'),
    SESSION_SECRET: 'test-session-secret-0123456789',
    IDP_URL: inject('idpUrl'),
    IDP_CERT_FILE: inject('idpCertFile'),
    SMTP_URL: inject('smtpUrl'),
    MAILBOX_URL: inject('mailboxUrl'),
    TSA_URL: inject('tsaUrl'),
    TSA_ROOT_CERT_FILE: inject('tsaRootCertFile'),
    LOG_LEVEL: 'silent',
    ...opts.env,
  });
  const ds = await openDatabase(databaseUrl, { migrate: false, replicas: config.db.replicas });
  if (opts.seed !== false && !opts.databaseUrl) await seedDemo(ds);
  const logger = opts.logger ?? pino({ level: 'silent' });
  const mail = createMailSender({ dataSource: ds, smtpUrl: config.smtpUrl, from: config.mailFrom, logger });
  const deps: AppDeps = { config, dataSource: ds, logger, mail };
  const app = createApp(deps);
  let worker: Promise<Worker> | null = null;
  return {
    app, ds, deps, config, databaseUrl, ownerUrl,
    startJobs: async () => {
      worker ??= startWorker({ dataSource: ds, databaseUrl, config, logger, pollingIntervalSeconds: 0.5 });
      await worker;
    },
    close: async () => {
      if (worker) await (await worker).stop();
      mail.stop();
      await stopQueues(); // uploads and acceptances put result jobs on the queue through a sending connection
      await app.locals.closeSessionPool?.();
      await ds.destroy();
    },
  };
}

/** A personal API token for a seeded person, as a script would use it. */
export async function tokenFor(t: TestApp, email: string): Promise<string> {
  const user = await t.ds.getRepository(UserEntity).findOneByOrFail({ email });
  return (await issueToken(t.ds, user.id, 'test', null)).secret;
}

/**
 * Signs in through the real flow: the app's SAML request → the local identity provider's form → the signed
 * response posted back. Returns a cookie-carrying agent and the CSRF token for changes.
 */
export async function signInAs(t: TestApp, email: string) {
  const agent = request.agent(t.app);
  const login = await agent.get('/auth/saml/login?returnTo=/');
  if (login.status !== 302) throw new Error(`login did not redirect: ${login.status}`);
  const idpSso = new URL(login.headers.location);
  const ssoPage = await fetch(idpSso);
  const html = await ssoPage.text();
  const field = (n: string) => new RegExp(`name="${n}" value="([^"]*)"`).exec(html)?.[1] ?? '';
  const form = new URLSearchParams({ requestId: field('requestId'), acsUrl: field('acsUrl'), audience: field('audience'), relayState: field('relayState'), email });
  const idpAnswer = await fetch(`${idpSso.origin}/sso`, { method: 'POST', body: form, headers: { 'content-type': 'application/x-www-form-urlencoded' } });
  const answer = await idpAnswer.text();
  const samlResponse = /name="SAMLResponse" value="([^"]+)"/.exec(answer)?.[1];
  if (!samlResponse) throw new Error(`identity provider gave no response: ${answer.slice(0, 200)}`);
  const cb = await agent.post('/auth/saml/callback').type('form').send({ SAMLResponse: samlResponse, RelayState: '/' });
  if (cb.status !== 303) throw new Error(`callback refused: ${cb.status} ${cb.text}`);
  const me = await agent.get('/api/v1/me');
  return { agent, csrf: me.body.csrfToken as string, me: me.body };
}

/** Reads what the local test mailbox received. */
export async function caughtMail(): Promise<{ to: string[]; subject: string; text: string }[]> {
  const res = await fetch(`${inject('mailboxUrl')}/messages`);
  return res.json();
}
