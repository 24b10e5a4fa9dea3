// `npm run admin -- users` lists people; `npm run admin -- token --email <e-mail> [--name <what for>]` prints a new
// API token once, on a line of its own. Uses DATABASE_URL, or the local cluster that `npm start` runs.
import { parseArgs } from 'node:util';
import { loadConfig } from '../config';
import { openDatabase } from '../db/data-source';
import { UserEntity } from '../db/entities/core.entities';
import { issueToken } from '../tokens/tokens.service';

const { positionals, values } = parseArgs({
  allowPositionals: true,
  options: { email: { type: 'string' }, name: { type: 'string', default: 'command line' } },
});
process.env.DATABASE_URL ??= 'postgres://chronolevel@127.0.0.1:55432/chronolevel';
const config = loadConfig();
const ds = await openDatabase(config.databaseUrl, { migrate: false }).catch((e: Error) => {
  console.error(`error: cannot reach the database (${e.message}). Is \`npm start\` running, or is DATABASE_URL set?`);
  process.exit(1);
});
let code = 0;
try {
  const command = positionals[0];
  if (command === 'users') {
    const users = await ds.getRepository(UserEntity).find({ relations: { institute: true }, order: { email: 'ASC' } });
    for (const u of users) console.log(`${u.email}\t${u.role}\t${u.institute?.code ?? '-'}\t${u.displayName}`);
  } else if (command === 'token') {
    if (!values.email) throw new Error('token needs --email <e-mail>');
    const user = await ds.getRepository(UserEntity).findOneBy({ email: values.email.toLowerCase() });
    if (!user) throw new Error(`no user with e-mail ${values.email}`);
    const { secret } = await issueToken(ds, user.id, values.name!, null);
    console.error(`New API token for ${user.email} (${user.role}); it is shown only once:`);
    console.log(secret);
  } else {
    console.error('usage: npm run admin -- users | token --email <e-mail> [--name <what for>]');
    code = 2;
  }
} catch (e) {
  console.error(`error: ${(e as Error).message}`);
  code = 1;
} finally {
  await ds.destroy();
}
process.exit(code);
