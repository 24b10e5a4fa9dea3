import { AsyncLocalStorage } from 'node:async_hooks';
import pg from 'pg';
import type { DataSource, QueryRunner, ReplicationMode } from 'typeorm';

// Reads from PostgreSQL hot standbys (docs/decisions/0009-read-replicas.md). TypeORM's `replication` setting gives
// the data source one pool for the primary and one per standby; this module decides, per HTTP request, which one a
// read goes to:
// - writes (and everything outside a request: workers, start-up, the health check) always use the primary;
// - a read route runs inside a scope that sends its queries (find…, query builders, transactions, plain
//   `SELECT`/`WITH` text through dataSource.query) to a standby that is up and not lagging; other statement text
//   through dataSource.query stays on the primary, and a write that still reaches the standby is refused by it
//   (PostgreSQL: read-only transaction) with an error naming the cause;
// - read-your-writes: a write route records, for its caller, the primary's WAL position after the write
//   (pg_current_wal_lsn(), table read_after_write on the primary, so every HTTP process sees it); that caller's reads
//   go to the primary until a standby has replayed past it (pg_last_wal_replay_lsn()), for a bounded time;
// - a monitor (one small connection per server) measures each standby's replay lag every few hundred milliseconds;
//   a standby that lags beyond the threshold or does not answer is left out, reads fall back to the primary, and
//   /api/health says so.

export type ReplicaOptions = {
  urls: string[];
  /** a standby further behind than this (seconds) takes no reads */
  maxLagSeconds: number;
  /** how often the monitor measures the standbys, ms */
  checkIntervalMs: number;
  /** longest time a caller's reads stay on the primary after a write, s */
  readAfterWriteSeconds: number;
};

export type ReplicaState = 'ok' | 'lagging' | 'down';
export type ReplicaStatus = { name: string; state: ReplicaState; lagSeconds: number | null; reason?: string };
export type ReplicationHealth = {
  state: ReplicaState | 'not-configured';
  /** largest measured lag of the standbys that answer, seconds */
  lagSeconds: number | null;
  /** where read routes go at the moment */
  readsFrom: 'replicas' | 'primary';
  replicas: ReplicaStatus[];
};

/** What a route does with the database: `read` may use a standby; `primary` reads there; `write` also pins the caller's next reads. */
export type DbAccess = 'read' | 'primary' | 'write';

type Scope = { replica: number | null };
const scopes = new AsyncLocalStorage<Scope>();
const sets = new WeakMap<DataSource, ReplicaSet>();

const CHECK_TIMEOUT_MS = 2000;
const SAMPLE_KEEP_MS = 10 * 60_000;
const MARKER_PRUNE_EVERY_MS = 60_000;
/** a write that is still running pins its caller's reads to the primary at most this long */
const WRITE_IN_PROGRESS_SECONDS = 3600;

/** "16/B374D848" → bigint */
export function parseLsn(text: string): bigint {
  const [hi, lo] = text.split('/');
  return (BigInt(`0x${hi}`) << 32n) | BigInt(`0x${lo}`);
}

/** Statement text that only reads: plain SELECT or WITH without a data-modifying part or a row lock. */
export function isPlainRead(sql: string): boolean {
  return /^\s*(select|with)\b/i.test(sql) && !/\b(insert|update|delete|merge|nextval|setval)\b|\bfor\s+(update|share|no\s+key|key)\b/i.test(sql);
}

function connectionLost(e: unknown): boolean {
  const err = e as { code?: string; message?: string; driverError?: { code?: string } };
  const code = err.driverError?.code ?? err.code;
  return ['ECONNREFUSED', 'ECONNRESET', 'EPIPE', 'ETIMEDOUT', '57P01', '57P02', '57P03', '08006', '08003', '08001'].includes(code ?? '')
    || /Connection terminated|connection timeout|Client has encountered a connection error/i.test(err.message ?? '');
}

function refusedAsReadOnly(e: unknown): boolean {
  const err = e as { code?: string; driverError?: { code?: string } };
  return (err.driverError?.code ?? err.code) === '25006';
}

function serverName(url: string): string {
  const u = new URL(url);
  return `${u.hostname}:${u.port || '5432'}${u.pathname}`;
}

function withTimeout<T>(p: Promise<T>, ms: number, what: string): Promise<T> {
  let timer: NodeJS.Timeout | undefined;
  return Promise.race([p, new Promise<T>((_, reject) => (timer = setTimeout(() => reject(new Error(`${what}: no answer within ${ms} ms`)), ms)))])
    .finally(() => clearTimeout(timer));
}

type Driver = {
  slaves: pg.Pool[];
  obtainMasterConnection(): Promise<[pg.PoolClient, (err?: unknown) => void]>;
  obtainSlaveConnection(): Promise<[pg.PoolClient, (err?: unknown) => void]>;
};

class ReplicaSet {
  readonly status: ReplicaStatus[];
  private readonly replay: (bigint | null)[];
  private readonly checkers: pg.Pool[];
  private readonly primaryChecker: pg.Pool;
  private samples: { t: number; lsn: bigint }[] = [];
  private timer?: NodeJS.Timeout;
  private running: Promise<void> = Promise.resolve();
  private lastPrune = 0;
  private next = 0;

  constructor(private readonly ds: DataSource, primaryUrl: string, readonly opts: ReplicaOptions) {
    const checker = (url: string) => {
      const pool = new pg.Pool({ connectionString: url, max: 1, application_name: 'chronolevel-replica-check', connectionTimeoutMillis: CHECK_TIMEOUT_MS, idleTimeoutMillis: 0 });
      pool.on('error', () => undefined); // a standby that goes away: the next check reports it
      return pool;
    };
    this.primaryChecker = checker(primaryUrl);
    this.checkers = opts.urls.map(checker);
    this.status = opts.urls.map((u) => ({ name: serverName(u), state: 'down', lagSeconds: null, reason: 'not checked yet' }));
    this.replay = opts.urls.map(() => null);
  }

  start() {
    this.timer = setInterval(() => {
      this.running = this.check();
    }, this.opts.checkIntervalMs);
    this.timer.unref();
    return (this.running = this.check());
  }

  async stop() {
    clearInterval(this.timer);
    await this.running.catch(() => undefined);
    await Promise.all([this.primaryChecker, ...this.checkers].map((p) => p.end().catch(() => undefined)));
  }

  /** One measurement: the primary's WAL position first, then each standby's replay position. */
  async check(): Promise<void> {
    const now = Date.now();
    try {
      const { rows } = await withTimeout(this.primaryChecker.query<{ lsn: string }>('SELECT pg_current_wal_lsn()::text AS lsn'), CHECK_TIMEOUT_MS, 'primary');
      const lsn = parseLsn(rows[0].lsn);
      const last = this.samples.at(-1);
      if (!last || lsn > last.lsn) this.samples.push({ t: now, lsn });
    } catch {
      // the primary's own health is /api/health's business; lag is measured against the last known position
    }
    await Promise.all(this.checkers.map(async (pool, i) => {
      try {
        const { rows } = await withTimeout(
          pool.query<{ standby: boolean; replay: string | null }>('SELECT pg_is_in_recovery() AS standby, pg_last_wal_replay_lsn()::text AS replay'),
          CHECK_TIMEOUT_MS, this.status[i].name,
        );
        const { standby, replay } = rows[0];
        if (!standby) return this.set(i, 'down', null, 'not a standby (pg_is_in_recovery() is false); no reads are sent to it');
        if (!replay) return this.set(i, 'down', null, 'has not replayed any WAL yet');
        const at = parseLsn(replay);
        this.replay[i] = at;
        const lag = this.lagOf(at, Date.now());
        if (lag > this.opts.maxLagSeconds) this.set(i, 'lagging', lag, `replay is ${lag.toFixed(1)} s behind the primary (threshold ${this.opts.maxLagSeconds} s)`);
        else this.set(i, 'ok', lag);
      } catch (e) {
        this.set(i, 'down', null, (e as Error).message);
      }
    }));
    // Samples the slowest answering standby has already replayed are no longer needed.
    const replayed = this.replay.filter((r, i): r is bigint => r !== null && this.status[i].state !== 'down');
    const floor = replayed.length ? replayed.reduce((a, b) => (a < b ? a : b)) : null;
    this.samples = this.samples.filter((s) => (floor === null || s.lsn > floor) && now - s.t < SAMPLE_KEEP_MS);
    if (now - this.lastPrune > MARKER_PRUNE_EVERY_MS) {
      this.lastPrune = now;
      await this.primaryChecker.query('DELETE FROM read_after_write WHERE until < now()').catch(() => undefined);
    }
  }

  /** Age of the oldest primary position the standby has not replayed (seconds; 0 when caught up). */
  private lagOf(replay: bigint, now: number): number {
    const first = this.samples.find((s) => s.lsn > replay);
    return first ? Math.max(0, (now - first.t) / 1000) : 0;
  }

  private set(i: number, state: ReplicaState, lagSeconds: number | null, reason?: string) {
    this.status[i] = { name: this.status[i].name, state, lagSeconds: lagSeconds === null ? null : Math.round(lagSeconds * 10) / 10, ...(reason ? { reason } : {}) };
    if (state === 'down') this.replay[i] = null;
  }

  markDown(i: number, e: unknown) {
    this.set(i, 'down', null, (e as Error).message || String(e));
  }

  health(): ReplicationHealth {
    const order: ReplicaState[] = ['ok', 'lagging', 'down'];
    const worst = this.status.reduce<ReplicaState>((w, s) => (order.indexOf(s.state) > order.indexOf(w) ? s.state : w), 'ok');
    const lags = this.status.filter((s) => s.lagSeconds !== null).map((s) => s.lagSeconds!);
    return {
      state: worst, lagSeconds: lags.length ? Math.max(...lags) : null,
      readsFrom: this.status.some((s) => s.state === 'ok') ? 'replicas' : 'primary', replicas: this.status.map((s) => ({ ...s })),
    };
  }

  /** The standby a read should use, or null for the primary. */
  async chooseForRead(callerId: string | null): Promise<number | null> {
    const usable = this.status.map((s, i) => (s.state === 'ok' ? i : -1)).filter((i) => i >= 0);
    if (!usable.length) return null;
    let candidates = usable;
    if (callerId) {
      const [marker] = (await this.ds.query(`SELECT wal_lsn::text AS lsn FROM read_after_write WHERE caller = $1 AND until > now()`, [callerId])) as { lsn: string | null }[];
      if (marker) {
        if (marker.lsn === null) return null; // a write of this caller is still running
        const need = parseLsn(marker.lsn);
        candidates = usable.filter((i) => (this.replay[i] ?? 0n) >= need);
        if (!candidates.length) {
          // The last measurement may be a few hundred ms old: ask one standby now.
          const i = usable[this.next++ % usable.length];
          try {
            const { rows } = await withTimeout((this.ds.driver as unknown as Driver).slaves[i].query<{ replay: string | null }>('SELECT pg_last_wal_replay_lsn()::text AS replay'), CHECK_TIMEOUT_MS, this.status[i].name);
            if (rows[0].replay && parseLsn(rows[0].replay) >= need) return i;
          } catch (e) {
            if (connectionLost(e)) this.markDown(i, e);
          }
          return null;
        }
      }
    }
    return candidates[this.next++ % candidates.length];
  }

  async noteWriteStart(callerId: string) {
    await this.ds.query(
      `INSERT INTO read_after_write (caller, wal_lsn, until) VALUES ($1, NULL, now() + make_interval(secs => $2))
       ON CONFLICT (caller) DO UPDATE SET wal_lsn = NULL, until = greatest(read_after_write.until, EXCLUDED.until)`,
      [callerId, WRITE_IN_PROGRESS_SECONDS],
    );
  }

  async noteWriteEnd(callerId: string) {
    await this.ds.query(
      `INSERT INTO read_after_write (caller, wal_lsn, until) VALUES ($1, pg_current_wal_lsn(), now() + make_interval(secs => $2))
       ON CONFLICT (caller) DO UPDATE SET wal_lsn = EXCLUDED.wal_lsn, until = EXCLUDED.until`,
      [callerId, this.opts.readAfterWriteSeconds],
    );
  }
}

/**
 * Wires a data source built with TypeORM's `replication` setting (defaultMode 'master') to the request scopes and
 * starts the lag monitor. Called by openDatabase once the data source is initialised.
 */
export async function installReplicaRouting(ds: DataSource, primaryUrl: string, opts: ReplicaOptions): Promise<void> {
  const set = new ReplicaSet(ds, primaryUrl, opts);
  sets.set(ds, set);
  const driver = ds.driver as unknown as Driver;

  // Select query builders and find… ask this for their mode: a standby only inside a read scope that chose one.
  ds.defaultReplicationModeForReads = (): ReplicationMode => (scopes.getStore()?.replica != null ? 'slave' : 'master');

  // The standby the scope chose; one that cannot be reached is marked down and the read goes to the primary.
  driver.obtainSlaveConnection = async () => {
    const i = scopes.getStore()?.replica;
    if (i == null || !driver.slaves[i]) return driver.obtainMasterConnection();
    try {
      const client = await driver.slaves[i].connect();
      return [client, (err?: unknown) => client.release(err as Error | undefined)];
    } catch (e) {
      set.markDown(i, e);
      return driver.obtainMasterConnection();
    }
  };

  // Runners on a standby: a lost connection retries the read on the primary; a refused write says why.
  const createQueryRunner = ds.createQueryRunner.bind(ds);
  // TypeORM asks for a runner without a mode for transactions, saves and raw queries: inside a read scope that chose a
  // standby they run there (a detail read in a transaction included); a write among them is refused by the standby.
  ds.createQueryRunner = (requested?: ReplicationMode): QueryRunner => {
    const mode = requested ?? (scopes.getStore()?.replica != null ? 'slave' : 'master');
    const runner = createQueryRunner(mode);
    if (mode !== 'slave') return runner;
    const query = runner.query;
    runner.query = (async (...args: Parameters<QueryRunner['query']>) => {
      try {
        return await query.apply(runner, args);
      } catch (e) {
        if (refusedAsReadOnly(e)) {
          throw new Error(
            `A read replica refused a write (${(e as Error).message}). This request was classified as a read and its queries go to a standby; `
            + `declare the route with db: 'write' (server/http/route.ts) so that it runs on the primary.`,
            { cause: e },
          );
        }
        if (connectionLost(e) && !runner.isTransactionActive) {
          const i = scopes.getStore()?.replica;
          if (i != null) set.markDown(i, e);
          const primary = createQueryRunner('master');
          try {
            return await primary.query(...args);
          } finally {
            await primary.release();
          }
        }
        throw e;
      }
    }) as QueryRunner['query'];
    return runner;
  };

  // Statement text through dataSource.query / manager.query outside a transaction: plain SELECT/WITH follows the
  // scope, anything else goes to the primary even inside a read scope.
  const query = ds.query.bind(ds);
  ds.query = (async (sql: string, parameters?: unknown[], queryRunner?: QueryRunner) => {
    if (queryRunner || scopes.getStore()?.replica == null || isPlainRead(sql)) return query(sql, parameters, queryRunner);
    const runner = ds.createQueryRunner('master');
    try {
      return await runner.query(sql, parameters);
    } finally {
      await runner.release();
    }
  }) as DataSource['query'];

  const destroy = ds.destroy.bind(ds);
  ds.destroy = async () => {
    await set.stop();
    return destroy();
  };
  await set.start();
}

/** The standbys' state for /api/health (`not-configured` without replicas). */
export function replicationHealth(ds: DataSource): ReplicationHealth {
  return sets.get(ds)?.health() ?? { state: 'not-configured', lagSeconds: null, readsFrom: 'primary', replicas: [] };
}

/** Measure the standbys now instead of waiting for the next tick (tests, and the health check when asked). */
export async function checkReplicasNow(ds: DataSource): Promise<void> {
  await sets.get(ds)?.check();
}

/**
 * Runs one request's work against the right server. `read`: a standby when one is usable and the caller has no
 * write the standbys have not replayed yet; `write`: the primary, and the caller's next reads stay there until a
 * standby has replayed this write. Without replicas it just runs `fn`.
 */
export async function onDatabase<T>(ds: DataSource, access: DbAccess, callerId: string | null, fn: () => Promise<T>): Promise<T> {
  const set = sets.get(ds);
  if (!set) return fn();
  if (access === 'read') return scopes.run({ replica: await set.chooseForRead(callerId) }, fn);
  if (access === 'primary' || !callerId) return scopes.run({ replica: null }, fn);
  await set.noteWriteStart(callerId);
  try {
    return await scopes.run({ replica: null }, fn);
  } finally {
    await set.noteWriteEnd(callerId);
  }
}

/** Records a write made outside a route (sign-in): the caller's next reads see it. */
export async function noteWrite(ds: DataSource, callerId: string): Promise<void> {
  await sets.get(ds)?.noteWriteEnd(callerId);
}
