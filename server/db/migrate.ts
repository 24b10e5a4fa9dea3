// `npm run db:migrate`: migrations as the owner role (MIGRATION_DATABASE_URL), then the application role's grants
// (the role named in DATABASE_URL). With only DATABASE_URL, migrations run with it as before (see docs/operations.md).
import { loadConfig } from '../config';
import { migrateDatabase, roleOfUrl } from './roles';

const config = loadConfig();
await migrateDatabase({ migrationUrl: process.env.MIGRATION_DATABASE_URL || config.databaseUrl, appRole: roleOfUrl(config.databaseUrl) });
console.log('migrations applied');
