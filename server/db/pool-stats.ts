import type pg from 'pg';
import type { DataSource } from 'typeorm';

export type PoolStats = { max: number; total: number; idle: number; inUse: number; waiting: number };

export function poolOf(dataSource: DataSource): pg.Pool | null {
  return (dataSource.driver as unknown as { master?: pg.Pool }).master ?? null;
}

/** Connections of this process's pool: open, idle, checked out, and requests waiting for one. */
export function poolStats(dataSource: DataSource): PoolStats | null {
  const pool = poolOf(dataSource);
  if (!pool) return null;
  const max = (pool.options as { max?: number }).max ?? 10;
  return { max, total: pool.totalCount, idle: pool.idleCount, inUse: pool.totalCount - pool.idleCount, waiting: pool.waitingCount };
}

/** Saturated: every connection is checked out, or requests already queue for one. */
export function isSaturated(s: PoolStats): boolean {
  return s.waiting > 0 || (s.inUse >= s.max && s.idle === 0);
}
