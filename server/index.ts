import path from 'node:path';
import type { Server } from 'node:http';
import { createApp } from './app';
import { loadConfig } from './config';
import { openDatabase } from './db/data-source';
import { startFakeIdp } from './dev/fake-idp';
import { startFakeSmtp } from './dev/fake-smtp';
import { createLogger } from './logger';
import { createMailSender } from './mail/outbox';
import { seedDemo } from '../seeds/demo';
import { demoPeople } from '../seeds/people';
import { startWorker } from './jobs/worker';
import { stopQueues } from './jobs/queue';

// The server process: configuration, local stand-ins (identity provider, test mailbox), database, HTTP.
const withDevServices = process.env.CHRONOLEVEL_DEV_SERVICES !== '0';
const config = loadConfig();
const logger = createLogger(config.logLevel);
const closers: (() => Promise<void> | void)[] = [];

async function main() {
  if (withDevServices) {
    const idp = await startFakeIdp({ port: new URL(config.idpUrl).port ? Number(new URL(config.idpUrl).port) : 8180, keysDir: path.dirname(config.idpCertFile) });
    closers.push(idp.close);
    const smtpPort = Number(new URL(config.smtpUrl).port || 2525);
    const smtp = await startFakeSmtp({ smtpPort, httpPort: Number(new URL(config.mailboxUrl).port || 8181) });
    closers.push(smtp.close);
    logger.info({ idp: idp.url, smtp: smtp.smtpUrl, mailbox: smtp.mailboxUrl }, 'local identity provider and test mailbox started');
  }
  const dataSource = await openDatabase(config.databaseUrl);
  closers.push(() => dataSource.destroy());
  if (process.env.CHRONOLEVEL_SEED !== '0') {
    const seeded = await seedDemo(dataSource, (m) => logger.info(m));
    logger.info(seeded ? 'demo scenario loaded into the empty database' : 'database already holds data; demo scenario not reloaded');
  }
  // One job worker inside this process (adjustment runs); more can run elsewhere with `tsx server/jobs/worker.ts`.
  const worker = await startWorker({ dataSource, databaseUrl: config.databaseUrl, logger });
  closers.push(() => worker.stop(), () => stopQueues());
  const mail = createMailSender({ dataSource, smtpUrl: config.smtpUrl, from: config.mailFrom, logger });
  mail.start();
  closers.push(() => mail.stop());
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
