import type { Logger } from 'pino';
import type { DataSource } from 'typeorm';
import type { AppConfig } from './config';
import type { MailSender } from './mail/outbox';

/** What the app needs from outside; built by server/index.ts or by a test. */
export type AppDeps = {
  config: AppConfig;
  dataSource: DataSource;
  logger: Logger;
  mail: MailSender;
};
