import path from 'node:path';
import type { Server } from 'node:http';
import { createApp } from './app';
import { loadConfig } from './config';
import { openDatabase } from './db/data-source';
import { replicationHealth } from './db/replicas';
import { startHousekeeping } from './maintenance/housekeeping';
import { closeStabilityPool, configureStabilityPool } from './calc/stability-pool';
import { startFakeIdp } from './dev/fake-idp';
import { startFakeSmtp } from './dev/fake-smtp';
import { assertDevServicesAllowed, DEMO_STAND_IN_NOTICE } from './dev/guard';
import { startFakeTsa } from './dev/fake-tsa';
import { createLogger } from './logger';
import { createMailSender } from './mail/outbox';
import { seedDemo } from '../seeds/demo';
import { demoPeople } from '../seeds/people';
import { startWorker } from './jobs/worker';
import { stopQueues } from './jobs/queue';
import { migrateDatabase, privilegeWarnings, roleOfUrl } from './db/roles';
import { writeAuditCheckpoint } from './audit/verify';

// The server process: configuration, local stand-ins (identity provider, test mailbox, time-stamping authority), database, HTTP.
const withDevServices = process.env.CHRONOLEVEL_DEV_SERVICES !== '0';
const config = loadConfig();
const logger = createLogger(config.logLevel);
const closers: (() => Promise<void> | void)[] = [];

async function main() {
  if (withDevServices) {
    assertDevServicesAllowed(config);
    const idp = await startFakeIdp({ port: new URL(config.idpUrl).port ? Number(new URL(config.idpUrl).port) : 8180, keysDir: path.dirname(config.idpCertFile) });
    closers.push(idp.close);
    const smtpPort = Number(new URL(config.smtpUrl).port || 2525);
    const smtp = await startFakeSmtp({ smtpPort, httpPort: Number(new URL(config.mailboxUrl).port || 8181) });
    closers.push(smtp.close);
    logger.info({ idp: idp.url, smtp: smtp.smtpUrl, mailbox: smtp.mailboxUrl }, 'local identity provider and test mailbox started');
    logger.warn(DEMO_STAND_IN_NOTICE);
    if (!process.env.TSA_URL) {
      // The local time-stamping authority, unless TSA_URL names a real one.
      const tsa = await startFakeTsa({ port: Number(new URL(config.tsaUrl).port || 8182), keysDir: path.dirname(config.tsaRootCertFile) });
      closers.push(tsa.close);
      logger.info({ tsa: tsa.url }, 'local time-stamping authority started');
    }
  }
  // Migrations as the owner role when MIGRATION_DATABASE_URL is given (`npm start` runs them in a process of their
  // own and never passes the owner's URL here); the application itself connects with DATABASE_URL.
  const migrationUrl = process.env.MIGRATION_DATABASE_URL;
  delete process.env.MIGRATION_DATABASE_URL;
  if (migrationUrl) await migrateDatabase({ migrationUrl, appRole: roleOfUrl(config.databaseUrl) });
  const dataSource = await openDatabase(config.databaseUrl, {
    migrate: !migrationUrl && process.env.CHRONOLEVEL_MIGRATED !== '1',
    pool: { max: config.db.poolMax, idleInTransactionTimeoutMs: config.db.idleInTransactionTimeoutMs },
    replicas: config.db.replicas,
  });
  if (config.db.replicas) logger.info({ replicas: replicationHealth(dataSource).replicas }, 'read replicas configured');
  closers.push(() => dataSource.destroy());
  for (const w of await privilegeWarnings(dataSource)) logger.warn(`WARNING: ${w}`);
  if (process.env.CHRONOLEVEL_SEED !== '0') {
    const seeded = await seedDemo(dataSource, (m) => logger.info(m));
    logger.info(seeded ? 'demo scenario loaded into the empty database' : 'database already holds data; demo scenario not reloaded');
  }
  // Jobs, mail sending and the periodic audit checkpoint run in worker processes (`npm run worker`; `npm start` starts
  // one beside this process). CHRONOLEVEL_INLINE_WORKER=1 runs them inside this process instead (single-process use).
  const inlineWorker = process.env.CHRONOLEVEL_INLINE_WORKER === '1';
  if (inlineWorker) {
    const worker = await startWorker({ dataSource, databaseUrl: config.databaseUrl, config, logger });
    closers.push(() => worker.stop());
    // Besides the checkpoint every 100 events, one every 15 minutes when anything was added (no-op otherwise).
    const checkpoints = setInterval(() => void writeAuditCheckpoint(dataSource, 'every 15 minutes').catch((e) => logger.error({ err: e }, 'audit checkpoint failed')), 15 * 60_000);
    closers.push(() => clearInterval(checkpoints));
  }
  closers.push(() => stopQueues());
  // This process only queues mail (outbox rows); its sender sends on demand (the test message) and, with the inline
  // worker, polls the outbox too. Row locks let any number of senders share the outbox without sending twice.
  const mail = createMailSender({ dataSource, smtpUrl: config.smtpUrl, from: config.mailFrom, logger, retry: config.mailRetry });
  if (inlineWorker) mail.start();
  closers.push(() => mail.stop());
  configureStabilityPool(config.stabilityWorkers);
  closers.push(() => closeStabilityPool());
  // expired SAML request ids and ended rate-limit windows
  const housekeeping = startHousekeeping(dataSource, { intervalMs: config.samlRequestPruneIntervalMs, onError: (e) => logger.warn({ err: e }, 'housekeeping failed') });
  closers.unshift(() => housekeeping.stop());
  const app = createApp({ config, dataSource, logger, mail });
  const server: Server = await new Promise((resolve) => {
    const s = app.listen(config.port, config.host, () => resolve(s));
  });
  closers.unshift(() => new Promise<void>((r) => server.close(() => r())));
  closers.push(() => app.locals.closeSessionPool?.());
  logger.info(`Chronolevel is serving on ${config.publicUrl}`);
  // The start banner lists every demo person the local identity provider offers.
  process.send?.({ ready: true, url: config.publicUrl, people: demoPeople.map((p) => ({ email: p.email, name: p.displayName, role: p.role, institute: p.instituteCode })) });
}

async function shutdown(signal: string) {
  logger.info({ signal }, 'stopping');
  for (const c of closers) {
    try {
      await c();
    } catch {
      // keep closing the rest
    }
  }
  process.exit(0);
}
process.on('SIGINT', () => void shutdown('SIGINT'));
process.on('SIGTERM', () => void shutdown('SIGTERM'));

main().catch((e) => {
  logger.fatal({ err: e }, 'could not start');
  process.exit(1);
});
