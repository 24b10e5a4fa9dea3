import type { NextFunction, Request, RequestHandler, Response } from 'express';
import { RateLimiterPostgres, RateLimiterRes } from 'rate-limiter-flexible';
import type { DataSource } from 'typeorm';
import { AppError } from './errors';

// Rate limits with their counters in PostgreSQL (table rate_limit, rate-limiter-flexible's PostgreSQL store on the
// app's own pool), so every HTTP process behind a load balancer counts against the same limit. A caller is its user
// when signed in or holding a token, else its client address (behind a proxy set TRUST_PROXY=1 so that is the
// client's, not the proxy's).

export class TooManyRequests extends AppError {
  constructor(readonly retryAfterSeconds: number, limit: { points: number; durationSeconds: number }) {
    super(429, 'too-many-requests', 'Too many requests',
      `At most ${limit.points} such requests per ${limit.durationSeconds} s are accepted; try again in ${retryAfterSeconds} s.`,
      { retryAfterSeconds, limit: limit.points, windowSeconds: limit.durationSeconds });
  }
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
