import type { NextFunction, Request, RequestHandler, Response } from 'express';
import { RateLimiterPostgres, RateLimiterRes } from 'rate-limiter-flexible';
import type { DataSource } from 'typeorm';
import { AppError } from './errors';

// Rate limits with their counters in PostgreSQL (table rate_limit, rate-limiter-flexible's PostgreSQL store on the
// app's own pool), so every HTTP process behind a load balancer counts against the same limit. Two forms: a named
// limiter consumed inside a handler (`consumeOrRefuse`, public verification) and route middleware
// (`createRateLimit`: sign-in, calculators, uploads). A refusal is an RFC 9457 problem+json 429 with Retry-After
// (RFC 6585 §4). Behind a proxy set TRUST_PROXY=1 so the client address is the client's, not the proxy's.

export class TooManyRequests extends AppError {
  constructor(readonly retryAfterSeconds: number, limit?: { points: number; durationSeconds: number }) {
    super(429, 'too-many-requests', 'Too many requests',
      limit
        ? `At most ${limit.points} such requests per ${limit.durationSeconds} s are accepted; try again in ${retryAfterSeconds} s.`
        : `Too many requests of this kind from your address: try again in ${retryAfterSeconds} s.`,
      limit ? { retryAfterSeconds, limit: limit.points, windowSeconds: limit.durationSeconds } : { retryAfterSeconds });
  }
}

export type NamedLimitOptions = {
  /** names the limiter; stored as the key prefix, so it must be unique per kind of request */
  name: string;
  /** requests allowed per window */
  points: number;
  durationSeconds: number;
  /** how long a caller who went over waits (defaults to the rest of the window) */
  blockSeconds?: number;
};

const limiters = new WeakMap<DataSource, Map<string, RateLimiterPostgres>>();

/** The limiter of this name over this database (made once per data source). */
export function rateLimiter(dataSource: DataSource, opts: NamedLimitOptions): RateLimiterPostgres {
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
export async function consumeOrRefuse(dataSource: DataSource, opts: NamedLimitOptions, key: string, res?: Response): Promise<void> {
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
export function rateLimit(dataSource: DataSource, opts: NamedLimitOptions, key: (req: Request) => string = clientKey): RequestHandler {
  return (req: Request, res: Response, next: NextFunction) => {
    consumeOrRefuse(dataSource, opts, key(req), res).then(() => next(), next);
  };
}

export type RateLimitOptions = {
  /** names the counter (one per protected action): `sign-in`, `calc`, … */
  keyPrefix: string;
  /** requests allowed per window */
  points: number;
  durationSeconds: number;
  /** where the counters live; the app's data source */
  dataSource: DataSource;
  /** default: the caller's user id, else the client address */
  key?: (req: Request) => string;
  /** false: the middleware lets everything through (rate limiting switched off in the configuration) */
  enabled?: boolean;
};

const defaultKey = (req: Request) => (req.actor ? `user:${req.actor.userId}` : `ip:${req.ip ?? req.socket.remoteAddress ?? 'unknown'}`);

/** Express middleware answering RFC 9457 problem+json 429 with Retry-After once a caller used up its points. */
export function createRateLimit(opts: RateLimitOptions): RequestHandler {
  if (opts.enabled === false) return (_req, _res, next) => next();
  let limiter: RateLimiterPostgres | null = null;
  const keyOf = opts.key ?? defaultKey;
  return async (req: Request, res: Response, next: NextFunction) => {
    limiter ??= new RateLimiterPostgres({
      storeClient: opts.dataSource, storeType: 'typeorm', tableName: 'rate_limit', tableCreated: true, clearExpiredByTimeout: false,
      keyPrefix: opts.keyPrefix, points: opts.points, duration: opts.durationSeconds,
    });
    try {
      const r = await limiter.consume(keyOf(req));
      res.setHeader('RateLimit-Policy', `${opts.points};w=${opts.durationSeconds}`);
      res.setHeader('RateLimit', `limit=${opts.points}, remaining=${r.remainingPoints}, reset=${Math.ceil(r.msBeforeNext / 1000)}`);
      next();
    } catch (e) {
      if (e instanceof RateLimiterRes) {
        const retryAfter = Math.max(1, Math.ceil(e.msBeforeNext / 1000));
        res.setHeader('Retry-After', String(retryAfter));
        next(new TooManyRequests(retryAfter, opts));
        return;
      }
      next(e);
    }
  };
}

/** Removes counters whose window has ended (housekeeping; the store ignores them anyway). */
export async function pruneRateLimitCounters(dataSource: DataSource, now = Date.now()): Promise<number> {
  const [{ n }]: { n: number }[] = await dataSource.query('WITH d AS (DELETE FROM rate_limit WHERE expire IS NOT NULL AND expire < $1 RETURNING 1) SELECT count(*)::int AS n FROM d', [now]);
  return n;
}
