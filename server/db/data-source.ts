import { DataSource } from 'typeorm';
import { entities } from './entities/index';
import { migrations } from './migrations/index';

export function createDataSource(databaseUrl: string): DataSource {
  return new DataSource({
    type: 'postgres',
    url: databaseUrl,
    entities,
    migrations,
    migrationsTableName: 'schema_migration',
    synchronize: false,
    logging: false,
    extra: { max: 20 },
  });
}

export async function openDatabase(databaseUrl: string, { migrate = true } = {}): Promise<DataSource> {
  const ds = createDataSource(databaseUrl);
  await ds.initialize();
  if (migrate) await ds.runMigrations({ transaction: 'each' });
  return ds;
}
