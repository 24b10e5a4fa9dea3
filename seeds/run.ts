import { loadConfig } from '../server/config';
import { openDatabase } from '../server/db/data-source';
import { seedDemo } from './demo';

const config = loadConfig();
const ds = await openDatabase(config.databaseUrl);
const done = await seedDemo(ds, console.log);
console.log(done ? 'demo scenario loaded' : 'database already holds data; nothing seeded');
await ds.destroy();
