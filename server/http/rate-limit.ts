import type { NextFunction, Request, RequestHandler, Response } from 'express';
import { RateLimiterPostgres, RateLimiterRes } from 'rate-limiter-flexible';
import type { DataSource } from 'typeorm';
import { AppError } from './errors';

// Rate limits shared by every HTTP process: counters live in PostgreSQL (table rate_limit, made by a migration),
// kept by rate-limiter-flexible's PostgreSQL store over the application's own connection pool. One limiter per
// name; callers are told how long to wait (429 problem+json with Retry-After, RFC 6585 §4).

export type RateLimitOptions = {
  /** names the limiter; stored as the key prefix, so it must be unique per kind of request */
  name: string;
  /** requests allowed per window */
  points: number;
  durationSeconds: number;
  /** how long a caller who went over waits (defaults to the rest of the window) */
  blockSeconds?: number;
};

export class TooManyRequests extends AppError {
  constructor(readonly retryAfterSeconds: number) {
    super(429, 'too-many-requests', 'Too many requests', `Too many requests of this kind from your address: try again in ${retryAfterSeconds} s.`, { retryAfterSeconds });
  }
}

const limiters = new WeakMap<DataSource, Map<string, RateLimiterPostgres>>();

/** The limiter of this name over this database (made once per data source). */
export function rateLimiter(dataSource: DataSource, opts: RateLimitOptions): RateLimiterPostgres {
  let byName = limiters.get(dataSource);
  if (!byName) limiters.set(dataSource, (byName = new Map()));
  let limiter = byName.get(opts.name);
  if (!limiter) {
    limiter = new RateLimiterPostgres({
      storeClient: dataSource, storeType: 'typeorm', tableName: 'rate_limit', tableCreated: true,
      keyPrefix: opts.name, points: opts.points, duration: opts.durationSeconds, blockDuration: opts.blockSeconds ?? 0,
      // the store deletes counters that expired over an hour ago every five minutes (an unref'd timer)
      clearExpiredByTimeout: true,
    });
    byName.set(opts.name, limiter);
  }
  return limiter;
}

/** The caller's address: Express's `req.ip`, which honours `trust proxy` when the app sits behind a proxy. */
export const clientKey = (req: Request): string => req.ip ?? req.socket.remoteAddress ?? 'unknown';

/** Counts one request for `key`; over the limit it sets Retry-After and throws a 429. */
export async function consumeOrRefuse(dataSource: DataSource, opts: RateLimitOptions, key: string, res?: Response): Promise<void> {
  try {
    await rateLimiter(dataSource, opts).consume(key);
  } catch (e) {
    if (!(e instanceof RateLimiterRes)) throw e;
    const seconds = Math.max(1, Math.ceil(e.msBeforeNext / 1000));
    res?.set('retry-after', String(seconds));
    throw new TooManyRequests(seconds);
  }
}

/** Express middleware form, keyed per client address unless told otherwise. */
export function rateLimit(dataSource: DataSource, opts: RateLimitOptions, key: (req: Request) => string = clientKey): RequestHandler {
  return (req: Request, res: Response, next: NextFunction) => {
    consumeOrRefuse(dataSource, opts, key(req), res).then(() => next(), next);
  };
}
