import type { DataSource } from 'typeorm';
import { pruneSamlRequests } from '../auth/saml-request-prune';
import { pruneRateLimitCounters } from '../http/rate-limit';
import { sweepRawFileOrphans } from '../uploads/raw-file-stream';

// Periodic pruning of rows that only matter for a short while: expired SAML request ids, rate-limit windows that
// have ended, and raw-file parts of uploads stopped between their two commits (never visible: no series). Safe to
// run in every process at once (plain DELETEs of expired rows; the parts' sweep skips uploads still running).
export async function runHousekeeping(dataSource: DataSource): Promise<{ samlRequests: number; rateLimitCounters: number; rawFileOrphans: number }> {
  return {
    samlRequests: await pruneSamlRequests(dataSource), rateLimitCounters: await pruneRateLimitCounters(dataSource),
    rawFileOrphans: await sweepRawFileOrphans(dataSource),
  };
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
