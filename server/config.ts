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
  MAIL_RETRY_BASE_MS: z.coerce.number().int().positive().default(30_000),
  MAIL_RETRY_CAP_MS: z.coerce.number().int().positive().default(60 * 60_000),
  MAIL_GIVE_UP_AFTER_MS: z.coerce.number().int().positive().default(3 * 24 * 60 * 60_000),
  // Session lifetimes (OWASP ASVS 4.0.3 V3.3.2 level 2: 30 minutes idle, 12 hours absolute).
  SESSION_IDLE_MINUTES: z.coerce.number().int().min(1).max(1440).default(30),
  SESSION_ABSOLUTE_HOURS: z.coerce.number().int().min(1).max(168).default(12),
  // The local identity provider and test mailbox are demo stand-ins; off loopback they start only with this set to 1.
  DEV_SERVICES_OFF_LOOPBACK: z.enum(['0', '1']).default('0'),
  /** RFC 3161 time-stamping authority; defaults to the local stand-in that `npm start` runs. */
  TSA_URL: z.string().url().default('http://127.0.0.1:8182'),
  /** PEM file with the root certificate(s) of the time-stamping authority, trusted when verifying. */
  TSA_ROOT_CERT_FILE: z.string().optional(),
  DB_POOL_MAX: z.coerce.number().int().min(2).max(500).default(20),
  DB_IDLE_IN_TRANSACTION_TIMEOUT_MS: z.coerce.number().int().min(1000).default(60_000),
  /** hot standbys for read routes, comma-separated postgres:// URLs (docs/operations.md, "Read replicas") */
  DATABASE_REPLICA_URLS: z.string().optional(),
  /** a standby further behind than this takes no reads (they go to the primary) */
  REPLICA_MAX_LAG_SECONDS: z.coerce.number().positive().default(10),
  REPLICA_CHECK_INTERVAL_MS: z.coerce.number().int().min(50).default(1000),
  /** after a write, its caller reads from the primary until a standby has replayed it, at most this long */
  REPLICA_READ_AFTER_WRITE_SECONDS: z.coerce.number().int().min(1).default(60),
  /** longest time one upload's COPY may run (a slow client included) before PostgreSQL cancels it */
  UPLOAD_STATEMENT_TIMEOUT_MS: z.coerce.number().int().min(1000).default(20 * 60_000),
  /** a file part that sends no byte for this long is treated as abandoned */
  UPLOAD_IDLE_TIMEOUT_MS: z.coerce.number().int().min(1000).default(60_000),
  /** longest line accepted in an uploaded CSV file, in bytes of text */
  UPLOAD_MAX_LINE_BYTES: z.coerce.number().int().min(256).default(64 * 1024),
  SECTIONS_UPLOAD_LIMIT_BYTES: z.coerce.number().int().positive().default(64 * 1024 * 1024),
  /** rate limiting; on by default, off by default under NODE_ENV=test (the limiter tests turn it on) */
  RATE_LIMITS: z.enum(['on', 'off']).optional(),
  RATE_LIMIT_SIGN_IN_PER_MINUTE: z.coerce.number().int().positive().default(30),
  RATE_LIMIT_VERIFY_PER_MINUTE: z.coerce.number().int().positive().default(30),
  RATE_LIMIT_CALC_PER_MINUTE: z.coerce.number().int().positive().default(60),
  RATE_LIMIT_UPLOADS_PER_MINUTE: z.coerce.number().int().positive().default(20),
  SAML_REQUEST_PRUNE_INTERVAL_MS: z.coerce.number().int().min(1000).default(10 * 60_000),
  STABILITY_WORKERS: z.coerce.number().int().min(1).max(16).default(1),
  /** test-only fault hook (see server/dev/fault-point.ts); refused when NODE_ENV=production */
  CHRONOLEVEL_FAULT_POINT: z.string().regex(/^[a-z-]+$/).optional(),
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
  /** mail outbox backoff (server/mail/outbox.ts) */
  mailRetry: { baseMs: number; capMs: number; giveUpAfterMs: number };
  sessionIdleMs: number;
  sessionAbsoluteMs: number;
  devServicesOffLoopback: boolean;
  tsaUrl: string;
  tsaRootCertFile: string;
  db: { poolMax: number; idleInTransactionTimeoutMs: number; replicas?: { urls: string[]; maxLagSeconds: number; checkIntervalMs: number; readAfterWriteSeconds: number } };
  upload: { statementTimeoutMs: number; idleTimeoutMs: number; maxLineBytes: number; sectionsLimitBytes: number };
  /** requests per minute per caller (user, else client address); `enabled: false` turns every limiter off */
  rateLimits: { enabled: boolean; signInPerMinute: number; verifyPerMinute: number; calcPerMinute: number; uploadsPerMinute: number };
  samlRequestPruneIntervalMs: number;
  stabilityWorkers: number;
  faultPoint?: string;
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
  const replicaUrls = (e.DATABASE_REPLICA_URLS ?? '').split(',').map((u) => u.trim()).filter(Boolean);
  for (const u of replicaUrls) {
    if (!/^postgres(ql)?:\/\//.test(u)) throw new Error(`DATABASE_REPLICA_URLS: "${u.replace(/\/\/[^@]*@/, '//…@')}" is not a postgres:// URL`);
  }
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
    mailRetry: { baseMs: e.MAIL_RETRY_BASE_MS, capMs: e.MAIL_RETRY_CAP_MS, giveUpAfterMs: e.MAIL_GIVE_UP_AFTER_MS },
    sessionIdleMs: e.SESSION_IDLE_MINUTES * 60_000,
    sessionAbsoluteMs: e.SESSION_ABSOLUTE_HOURS * 3_600_000,
    devServicesOffLoopback: e.DEV_SERVICES_OFF_LOOPBACK === '1',
    tsaUrl: e.TSA_URL.replace(/\/$/, ''),
    tsaRootCertFile: e.TSA_ROOT_CERT_FILE ?? path.join(secretsDir, 'tsa', 'tsa-root.pem'),
    db: {
      poolMax: e.DB_POOL_MAX, idleInTransactionTimeoutMs: e.DB_IDLE_IN_TRANSACTION_TIMEOUT_MS,
      replicas: replicaUrls.length
        ? { urls: replicaUrls, maxLagSeconds: e.REPLICA_MAX_LAG_SECONDS, checkIntervalMs: e.REPLICA_CHECK_INTERVAL_MS, readAfterWriteSeconds: e.REPLICA_READ_AFTER_WRITE_SECONDS }
        : undefined,
    },
    upload: {
      statementTimeoutMs: e.UPLOAD_STATEMENT_TIMEOUT_MS, idleTimeoutMs: e.UPLOAD_IDLE_TIMEOUT_MS, maxLineBytes: e.UPLOAD_MAX_LINE_BYTES,
      sectionsLimitBytes: e.SECTIONS_UPLOAD_LIMIT_BYTES,
    },
    rateLimits: {
      enabled: e.RATE_LIMITS ? e.RATE_LIMITS === 'on' : e.NODE_ENV !== 'test', signInPerMinute: e.RATE_LIMIT_SIGN_IN_PER_MINUTE, verifyPerMinute: e.RATE_LIMIT_VERIFY_PER_MINUTE,
      calcPerMinute: e.RATE_LIMIT_CALC_PER_MINUTE, uploadsPerMinute: e.RATE_LIMIT_UPLOADS_PER_MINUTE,
    },
    samlRequestPruneIntervalMs: e.SAML_REQUEST_PRUNE_INTERVAL_MS,
    stabilityWorkers: e.STABILITY_WORKERS,
    faultPoint: e.NODE_ENV === 'production' ? undefined : e.CHRONOLEVEL_FAULT_POINT,
    reviewMinUptimeFraction: e.REVIEW_MIN_UPTIME,
    reviewFourEyes: e.REVIEW_FOUR_EYES === '1',
  };
}
