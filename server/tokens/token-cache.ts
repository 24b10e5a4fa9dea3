import pg from 'pg';
import type { DataSource } from 'typeorm';
import type { Actor } from '../auth/actor';

// Recently resolved API tokens, in the memory of one HTTP process, keyed by the token's SHA-256. Bounded in size
// (least recently used out first) and in age; never holds a token that failed to resolve.
//
// Never stale: every change of what a token lookup returns (revocation, expiry, the person's role, institute,
// deactivation, name) is announced by PostgreSQL triggers on the channel below at commit (migration
// 1766150000000-token-change-notify), whichever connection made it; this process LISTENs on one connection of its own
// and drops the entries concerned. Changes made through this process also drop them at once after their commit.
//
// The race between a notification and the next request is closed by a fence: before a cached entry is used, a ping
// (`SELECT pg_backend_pid()`) written on the listening connection after the request arrived must have been answered.
// PostgreSQL signals every listening session right after a notifying transaction commits, before the committing
// client gets its answer (src/backend/commands/async.c, header comment, step 5: SignalBackends from AtCommit_Notify),
// and a signalled session sends its notifications before the ReadyForQuery of its next statement
// (src/backend/tcop/postgres.c, PostgresMain: "if any notifies were received during the just-finished transaction,
// they'll be seen by the client before ReadyForQuery is"). node-postgres handles the messages of one connection in
// order, so the entries a change committed before the request are gone when the fence opens. Concurrent requests
// share one fence round trip. tests/api/token-cache.test.ts and two-processes.test.ts fail without the fence.
//
// A lookup made while a change was being applied is not stored: each lookup notes the generation before its SELECT
// and stores its row only if no entry was dropped since. Without the listening connection (lost, or not yet up) the
// cache is off and empty; every request then reads the database, as without a cache, until LISTEN works again.

export const TOKEN_CHANGE_CHANNEL = 'chronolevel_token_change';

export type CachedToken = {
  tokenId: string;
  actor: Actor;
  /** epoch ms */
  expiresAt: number;
  /** epoch ms of the last stored last-used stamp, null when never used */
  lastUsedAt: number | null;
  /** epoch ms when the lookup that produced this entry started */
  storedAt: number;
};

export type TokenCacheOptions = {
  /** the primary's URL (notifications are per database) */
  connectionString: string;
  /** at most this many tokens (default 10 000) */
  maxEntries?: number;
  /** an entry is used at most this long after its lookup, ms (default 30 000) */
  maxAgeMs?: number;
  /** a fence not answered within this time counts as a lost connection, ms (default 2000) */
  fenceTimeoutMs?: number;
  /** first delay before connecting again after a loss, doubled up to 10 s (default 500 ms) */
  retryMs?: number;
  /** told when the cache goes on (listening) or off (connection lost) */
  onState?: (listening: boolean, err?: Error) => void;
};

const MAX_RETRY_MS = 10_000;

export class TokenCache {
  private readonly entries = new Map<string, CachedToken>();
  private readonly maxEntries: number;
  private readonly maxAgeMs: number;
  private readonly fenceTimeoutMs: number;
  private readonly firstRetryMs: number;
  private retryMs: number;
  private generation = 0;
  private client: pg.Client | null = null;
  /** the server process of the listening session */
  private pid = 0;
  private listening = false;
  private stopped = false;
  private downReported = false;
  private retryTimer: NodeJS.Timeout | undefined;
  /** the fence whose ping was written last (settles at the latest after fenceTimeoutMs) */
  private inFlight: Promise<void> | null = null;
  /** the fence whose ping is not written yet: callers arriving now may share it */
  private waiting: Promise<void> | null = null;

  constructor(private readonly opts: TokenCacheOptions) {
    this.maxEntries = opts.maxEntries ?? 10_000;
    this.maxAgeMs = opts.maxAgeMs ?? 30_000;
    this.fenceTimeoutMs = opts.fenceTimeoutMs ?? 2000;
    this.firstRetryMs = this.retryMs = opts.retryMs ?? 500;
  }

  /** Connects and LISTENs; resolves after the first attempt (a failed one is retried in the background). */
  start(): Promise<void> {
    return this.connect();
  }

  async stop(): Promise<void> {
    this.stopped = true;
    clearTimeout(this.retryTimer);
    const c = this.client;
    this.off();
    if (c) await Promise.race([c.end().catch(() => undefined), new Promise((r) => setTimeout(r, 1000).unref())]);
  }

  /** On only while the listening connection is up. */
  get enabled(): boolean {
    return this.listening && !this.stopped;
  }

  get size(): number {
    return this.entries.size;
  }

  /** The generation a lookup notes before its SELECT, for put(). */
  mark(): number {
    return this.generation;
  }

  /**
   * The cached entry for a token hash, or null (not cached, too old, expired by its cached expires_at, cache off).
   * Waits for the fence when an entry is there, so nothing changed before the call is served.
   */
  async get(hash: string, now = Date.now): Promise<CachedToken | null> {
    if (!this.enabled || !this.entries.has(hash)) return null;
    try {
      await this.fence();
    } catch {
      return null;
    }
    const e = this.entries.get(hash);
    if (!e || !this.enabled) return null;
    const t = now();
    if (t - e.storedAt > this.maxAgeMs || e.expiresAt <= t) {
      this.entries.delete(hash);
      return null;
    }
    this.entries.delete(hash);
    this.entries.set(hash, e); // most recently used last
    return e;
  }

  /** Stores a lookup's row unless the cache is off or anything was dropped since `mark`. */
  put(hash: string, entry: CachedToken, mark: number): boolean {
    if (!this.enabled || mark !== this.generation) return false;
    this.entries.delete(hash);
    this.entries.set(hash, entry);
    while (this.entries.size > this.maxEntries) this.entries.delete(this.entries.keys().next().value as string);
    return true;
  }

  dropToken(tokenId: string): void {
    this.generation++;
    for (const [h, e] of this.entries) if (e.tokenId === tokenId) this.entries.delete(h);
  }

  dropUser(userId: string): void {
    this.generation++;
    for (const [h, e] of this.entries) if (e.actor.userId === userId) this.entries.delete(h);
  }

  clear(): void {
    this.generation++;
    this.entries.clear();
  }

  /** What a notification says: 't:<token id>', 'u:<user id>', or anything else (TRUNCATE's '*'): drop all. */
  applyNotification(payload: string | undefined): void {
    if (payload?.startsWith('t:')) this.dropToken(payload.slice(2));
    else if (payload?.startsWith('u:')) this.dropUser(payload.slice(2));
    else this.clear();
  }

  /** Resolves once a ping written after this call is answered on the listening connection; rejects when it is lost. */
  private fence(): Promise<void> {
    if (this.waiting) return this.waiting;
    const before = this.inFlight ?? Promise.resolve();
    const p: Promise<void> = before.catch(() => undefined).then(() => {
      if (this.waiting === p) this.waiting = null;
      const c = this.client;
      if (!c || !this.enabled) throw new Error('token cache: not listening');
      // The same server session must answer (a transaction-pooling proxy in between could hand the ping to another).
      const ping = this.timed(c, c.query<{ pid: number }>('SELECT pg_backend_pid() AS pid').then(({ rows }) => {
        if (rows[0]?.pid !== this.pid) {
          const err = new Error('token cache: the ping was answered by another server session than the one listening');
          this.lost(c, err);
          throw err;
        }
      }));
      this.inFlight = ping;
      const done = () => {
        if (this.inFlight === ping) this.inFlight = null;
      };
      ping.then(done, done);
      return ping;
    });
    this.waiting = p;
    return p;
  }

  private timed(c: pg.Client, p: Promise<void>): Promise<void> {
    let timer: NodeJS.Timeout | undefined;
    return Promise.race([
      p,
      new Promise<void>((_, reject) => {
        timer = setTimeout(() => {
          const err = new Error(`token cache: no answer on the listening connection within ${this.fenceTimeoutMs} ms`);
          this.lost(c, err);
          reject(err);
        }, this.fenceTimeoutMs);
      }),
    ]).finally(() => clearTimeout(timer));
  }

  private async connect(): Promise<void> {
    if (this.stopped) return;
    const c = new pg.Client({ connectionString: this.opts.connectionString, keepAlive: true, application_name: 'chronolevel-token-cache', connectionTimeoutMillis: 5000 });
    this.client = c;
    c.on('error', (e) => this.lost(c, e));
    c.on('end', () => this.lost(c, new Error('token cache: listening connection closed')));
    c.on('notification', (n) => {
      if (this.client === c && n.channel === TOKEN_CHANGE_CHANNEL) this.applyNotification(n.payload);
    });
    try {
      await c.connect();
      await c.query(`LISTEN ${TOKEN_CHANGE_CHANNEL}`);
      const { rows } = await c.query<{ pid: number; listening: boolean }>('SELECT pg_backend_pid() AS pid, EXISTS (SELECT 1 FROM pg_listening_channels() ch WHERE ch = $1) AS listening', [TOKEN_CHANGE_CHANNEL]);
      if (!rows[0]?.listening) throw new Error('token cache: LISTEN did not take effect on this session (a transaction-pooling proxy in between?)');
      this.pid = rows[0].pid;
    } catch (e) {
      if (this.client === c) this.lost(c, e as Error);
      else c.end().catch(() => undefined);
      return;
    }
    if (this.client !== c || this.stopped) {
      // stopped (or replaced) while connecting
      c.end().catch(() => undefined);
      return;
    }
    this.clear(); // nothing learnt before LISTEN took effect is kept
    this.listening = true;
    this.downReported = false;
    this.retryMs = this.firstRetryMs;
    this.opts.onState?.(true);
  }

  /** Off and empty at once; a new connection after a delay. */
  private lost(c: pg.Client, err: Error): void {
    if (this.client !== c) return;
    this.off();
    c.end().catch(() => undefined);
    if (this.stopped) return;
    // told once per outage (also when the very first attempt fails), not at every retry
    if (!this.downReported) this.opts.onState?.(false, err);
    this.downReported = true;
    this.retryTimer = setTimeout(() => void this.connect(), this.retryMs);
    this.retryTimer.unref();
    this.retryMs = Math.min(this.retryMs * 2, MAX_RETRY_MS);
  }

  private off(): void {
    this.listening = false;
    this.client = null;
    this.inFlight = null;
    this.waiting = null;
    this.clear();
  }
}

// The caches of the HTTP apps built on one data source, so that changes made through the app drop entries at once
// after their commit; destroying the data source stops them.
const caches = new WeakMap<DataSource, Set<TokenCache>>();

export function attachTokenCache(ds: DataSource, cache: TokenCache): void {
  let set = caches.get(ds);
  if (!set) {
    set = new Set();
    caches.set(ds, set);
    const all = set;
    const destroy = ds.destroy.bind(ds);
    ds.destroy = async () => {
      await Promise.all([...all].map((c) => c.stop()));
      return destroy();
    };
  }
  set.add(cache);
}

/** After a committed change of a person (role, institute, active state, name). */
export function forgetUserTokens(ds: DataSource, userId: string): void {
  for (const c of caches.get(ds) ?? []) c.dropUser(userId);
}

/** After a committed change of one token (revocation). */
export function forgetToken(ds: DataSource, tokenId: string): void {
  for (const c of caches.get(ds) ?? []) c.dropToken(tokenId);
}

/** For /api/health: 'on' while this process's cache listens, 'off' while it reads every token from the database. */
export function tokenCacheState(ds: DataSource): 'on' | 'off' | undefined {
  const set = caches.get(ds);
  if (!set?.size) return undefined;
  return [...set].some((c) => c.enabled) ? 'on' : 'off';
}
