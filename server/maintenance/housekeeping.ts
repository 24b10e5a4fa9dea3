import type { DataSource } from 'typeorm';
import { pruneSamlRequests } from '../auth/saml-request-prune';
import { pruneRateLimitCounters } from '../http/rate-limit';

// Periodic pruning of rows that only matter for a short while: expired SAML request ids and rate-limit windows that
// have ended. Safe to run in every process at once (plain DELETEs of expired rows).
export async function runHousekeeping(dataSource: DataSource): Promise<{ samlRequests: number; rateLimitCounters: number }> {
  return { samlRequests: await pruneSamlRequests(dataSource), rateLimitCounters: await pruneRateLimitCounters(dataSource) };
}

export function startHousekeeping(dataSource: DataSource, opts: { intervalMs: number; onError?: (e: unknown) => void }) {
  let running: Promise<unknown> = Promise.resolve();
  const timer = setInterval(() => {
    running = runHousekeeping(dataSource).catch((e) => opts.onError?.(e));
  }, opts.intervalMs);
  timer.unref();
  return {
    async stop() {
      clearInterval(timer);
      await running;
    },
  };
}
