import { DataSource } from 'typeorm';
import { entities } from './entities/index';
import { migrations } from './migrations/index';
import { installReplicaRouting, type ReplicaOptions } from './replicas';

export type PoolOptions = {
  /** connections of this process's pool */
  max?: number;
  /** PostgreSQL ends a session left idle inside a transaction this long (a crashed or stuck request), in ms */
  idleInTransactionTimeoutMs?: number;
};

export const DEFAULT_POOL_MAX = 20;
export const DEFAULT_IDLE_IN_TRANSACTION_TIMEOUT_MS = 60_000;

/**
 * With replicas: TypeORM's replication setting (one pool for the primary, one per standby), every query on the
 * primary unless a read route's scope chooses a standby (server/db/replicas.ts).
 */
export function createDataSource(databaseUrl: string, pool: PoolOptions = {}, replicaUrls: string[] = []): DataSource {
  const connection = replicaUrls.length
    ? { replication: { master: { url: databaseUrl }, slaves: replicaUrls.map((url) => ({ url })), defaultMode: 'master' as const }, applicationName: 'chronolevel' }
    : { url: databaseUrl };
  const ds = new DataSource({
    type: 'postgres',
    ...connection,
    entities,
    migrations,
    migrationsTableName: 'schema_migration',
    synchronize: false,
    logging: false,
    extra: {
      max: pool.max ?? DEFAULT_POOL_MAX,
      idle_in_transaction_session_timeout: pool.idleInTransactionTimeoutMs ?? DEFAULT_IDLE_IN_TRANSACTION_TIMEOUT_MS,
    },
  });
  if (replicaUrls.length) {
    // A standby that is down when the process starts must not stop it: its pool is made without a trial connection
    // (the primary's still gets one), and the lag monitor reports it.
    const driver = ds.driver as unknown as { createPool: (o: unknown, c: { url: string }) => Promise<unknown>; postgres: { Pool: new (o: object) => { on: (e: string, f: () => void) => void } } };
    const createPool = driver.createPool.bind(driver);
    driver.createPool = async (options, credentials) => {
      if (credentials.url === databaseUrl) return createPool(options, credentials);
      const p = new driver.postgres.Pool({ connectionString: credentials.url, application_name: 'chronolevel', connectionTimeoutMillis: 2000, ...(ds.options.extra as object) });
      p.on('error', () => undefined);
      return p;
    };
  }
  return ds;
}

export async function openDatabase(
  databaseUrl: string,
  { migrate = true, pool = {} as PoolOptions, replicas = undefined as ReplicaOptions | undefined } = {},
): Promise<DataSource> {
  const replicaUrls = replicas?.urls ?? [];
  const ds = createDataSource(databaseUrl, pool, replicaUrls);
  await ds.initialize();
  if (migrate) await ds.runMigrations({ transaction: 'each' });
  if (replicas && replicaUrls.length) await installReplicaRouting(ds, databaseUrl, replicas);
  return ds;
}
