import http from 'node:http';
import pino from 'pino';
import { createApp } from '../../server/app';
import { loadConfig } from '../../server/config';
import { openDatabase } from '../../server/db/data-source';
import { startWorker } from '../../server/jobs/worker';
import { createMailSender } from '../../server/mail/outbox';

// The app alone in its own process, for tests that kill the server mid-upload and for the ingest benchmark
// (which reads this process's peak RSS). Configuration comes as JSON in CHRONOLEVEL_CHILD_ENV; prints "LISTENING <port>".
const env = JSON.parse(process.env.CHRONOLEVEL_CHILD_ENV ?? '{}') as Record<string, string>;
const config = loadConfig(env);
const ds = await openDatabase(config.databaseUrl, { migrate: false, pool: { max: config.db.poolMax, idleInTransactionTimeoutMs: config.db.idleInTransactionTimeoutMs } });
// Silent unless asked (CHRONOLEVEL_CHILD_LOG_LEVEL): the kill harness keeps the log lines on stderr to explain a
// timeout; written synchronously, so a line logged just before the event loop stops is not lost.
const logger = pino({ level: process.env.CHRONOLEVEL_CHILD_LOG_LEVEL ?? 'silent' }, pino.destination({ dest: 2, sync: true }));
const mail = createMailSender({ dataSource: ds, smtpUrl: config.smtpUrl, from: config.mailFrom, logger });
const app = createApp({ config, dataSource: ds, logger, mail });
// A job worker in the same process when asked (CHRONOLEVEL_CHILD_WORKER=1): a kill then takes both down together.
if (process.env.CHRONOLEVEL_CHILD_WORKER === '1') await startWorker({ dataSource: ds, databaseUrl: config.databaseUrl, config, logger, pollingIntervalSeconds: 0.5 });
// Which process answered, for tests that run several behind a load balancer.
const instance = process.env.CHRONOLEVEL_INSTANCE ?? '';
const server = http.createServer((req, res) => {
  if (instance) res.setHeader('x-chronolevel-instance', instance);
  app(req, res);
});
server.listen(0, '127.0.0.1', () => {
  const addr = server.address();
  process.stdout.write(`LISTENING ${typeof addr === 'object' && addr ? addr.port : 0}\n`);
});
process.on('SIGTERM', () => process.exit(0));
