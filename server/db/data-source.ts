import { DataSource } from 'typeorm';
import { entities } from './entities/index';
import { migrations } from './migrations/index';

export type PoolOptions = {
  /** connections of this process's pool */
  max?: number;
  /** PostgreSQL ends a session left idle inside a transaction this long (a crashed or stuck request), in ms */
  idleInTransactionTimeoutMs?: number;
};

export const DEFAULT_POOL_MAX = 20;
export const DEFAULT_IDLE_IN_TRANSACTION_TIMEOUT_MS = 60_000;

export function createDataSource(databaseUrl: string, pool: PoolOptions = {}): DataSource {
  return new DataSource({
    type: 'postgres',
    url: databaseUrl,
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
}

export async function openDatabase(databaseUrl: string, { migrate = true, pool = {} as PoolOptions } = {}): Promise<DataSource> {
  const ds = createDataSource(databaseUrl, pool);
  await ds.initialize();
  if (migrate) await ds.runMigrations({ transaction: 'each' });
  return ds;
}
