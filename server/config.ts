import crypto from 'node:crypto';
import fs from 'node:fs';
import path from 'node:path';
import { z } from 'zod';

// One typed configuration object, read once from the environment at boot.
const envSchema = z.object({
  NODE_ENV: z.enum(['development', 'production', 'test']).default('development'),
  HOST: z.string().default('127.0.0.1'),
  PORT: z.coerce.number().int().min(0).max(65535).default(8080),
  PUBLIC_URL: z.string().url().optional(),
  DATABASE_URL: z.string().min(1),
  SECRETS_DIR: z.string().default('.secrets'),
  SESSION_SECRET: z.string().min(16).optional(),
  IDP_URL: z.string().url().default('http://127.0.0.1:8180'),
  IDP_CERT_FILE: z.string().optional(),
  SMTP_URL: z.string().default('smtp://127.0.0.1:2525'),
  MAILBOX_URL: z.string().url().default('http://127.0.0.1:8181'),
  MAIL_FROM: z.string().default('Chronolevel <no-reply@chronolevel.invalid>'),
  COORDINATOR_MAIL: z.string().default('review-desk@geopotential-office.invalid'),
  UPLOAD_LIMIT_BYTES: z.coerce.number().int().positive().default(512 * 1024 * 1024),
  LOG_LEVEL: z.enum(['fatal', 'error', 'warn', 'info', 'debug', 'trace', 'silent']).default('info'),
  TRUST_PROXY: z.enum(['0', '1']).default('0'),
  SIGNING_P12_FILE: z.string().optional(),
  SIGNING_P12_PASSPHRASE: z.string().optional(),
  /** Accepting or certifying a campaign whose uptime is below this fraction needs a written justification. */
  REVIEW_MIN_UPTIME: z.coerce.number().min(0).max(1).default(0.5),
  /** '1': the person who accepted a campaign may not also issue its certificate (four-eyes rule). */
  REVIEW_FOUR_EYES: z.enum(['0', '1']).default('0'),
});

export type AppConfig = {
  env: 'development' | 'production' | 'test';
  host: string;
  port: number;
  publicUrl: string;
  databaseUrl: string;
  secretsDir: string;
  sessionSecret: string;
  idpUrl: string;
  idpCertFile: string;
  smtpUrl: string;
  mailboxUrl: string;
  mailFrom: string;
  coordinatorMail: string;
  uploadLimitBytes: number;
  logLevel: string;
  trustProxy: boolean;
  signingP12File?: string;
  signingP12Passphrase?: string;
  reviewMinUptimeFraction: number;
  reviewFourEyes: boolean;
};

/** A secret kept in the git-ignored secrets folder, created on first use. */
export function persistentSecret(secretsDir: string, name: string): string {
  fs.mkdirSync(secretsDir, { recursive: true, mode: 0o700 });
  const file = path.join(secretsDir, name);
  if (!fs.existsSync(file)) fs.writeFileSync(file, crypto.randomBytes(32).toString('hex'), { mode: 0o600 });
  return fs.readFileSync(file, 'utf8').trim();
}

export function loadConfig(env: NodeJS.ProcessEnv = process.env): AppConfig {
  const e = envSchema.parse(env);
  const secretsDir = path.resolve(e.SECRETS_DIR);
  return {
    env: e.NODE_ENV,
    host: e.HOST,
    port: e.PORT,
    publicUrl: (e.PUBLIC_URL ?? `http://${e.HOST}:${e.PORT}`).replace(/\/$/, ''),
    databaseUrl: e.DATABASE_URL,
    secretsDir,
    sessionSecret: e.SESSION_SECRET ?? persistentSecret(secretsDir, 'session-secret'),
    idpUrl: e.IDP_URL.replace(/\/$/, ''),
    idpCertFile: e.IDP_CERT_FILE ?? path.join(secretsDir, 'idp', 'idp-cert.pem'),
    smtpUrl: e.SMTP_URL,
    mailboxUrl: e.MAILBOX_URL.replace(/\/$/, ''),
    mailFrom: e.MAIL_FROM,
    coordinatorMail: e.COORDINATOR_MAIL,
    uploadLimitBytes: e.UPLOAD_LIMIT_BYTES,
    logLevel: e.LOG_LEVEL,
    trustProxy: e.TRUST_PROXY === '1',
    signingP12File: e.SIGNING_P12_FILE,
    signingP12Passphrase: e.SIGNING_P12_PASSPHRASE,
    reviewMinUptimeFraction: e.REVIEW_MIN_UPTIME,
    reviewFourEyes: e.REVIEW_FOUR_EYES === '1',
  };
}
