import { loadConfig } from '../config';
import { openDatabase } from './data-source';

const config = loadConfig();
const ds = await openDatabase(config.databaseUrl);
console.log('migrations applied');
await ds.destroy();
