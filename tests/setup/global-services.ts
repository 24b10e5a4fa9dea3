import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import type { TestProject } from 'vitest/node';
// @ts-expect-error plain ESM helper shared with `npm start`
import { APP_ROLE, OWNER_ROLE, ROLES_SQL, freePort, startCluster, urlAsRole } from '../../scripts/lib/postgres.mjs';
import { openDatabase } from '../../server/db/data-source';
import { migrateDatabase } from '../../server/db/roles';
import { seedDemo } from '../../seeds/demo';
import { startFakeIdp } from '../../server/dev/fake-idp';
import { startFakeSmtp } from '../../server/dev/fake-smtp';
import { startFakeTsa } from '../../server/dev/fake-tsa';

// Once per test run: a private PostgreSQL in a temporary folder with a migrated template database,
// the local identity provider, the test mailbox and the time-stamping authority, all on free loopback ports.
declare module 'vitest' {
  export interface ProvidedContext {
    pgAdminUrl: string;
    templateDb: string;
    idpUrl: string;
    idpCertFile: string;
    secretsDir: string;
    smtpUrl: string;
    mailboxUrl: string;
    tsaUrl: string;
    tsaRootCertFile: string;
  }
}

export default async function setup(project: TestProject) {
  const tmp = fs.mkdtempSync(path.join(os.tmpdir(), 'chronolevel-test-'));
  const secretsDir = path.join(tmp, 'secrets');
  let pgUrl = process.env.TEST_DATABASE_ADMIN_URL;
  let stopPg = () => {};
  if (!pgUrl) {
    const port = await freePort();
    process.env.PG_FSYNC = 'off';
    const cluster = await startCluster({ dataDir: path.join(tmp, 'pg'), port, database: 'postgres', log: () => {} });
    pgUrl = cluster.url;
    stopPg = cluster.stop;
  }
  const admin = await openDatabase(pgUrl!, { migrate: false });
  const templateDb = `chronolevel_template_${process.pid}`;
  await admin.query(`DROP DATABASE IF EXISTS ${templateDb}`);
  // Database roles as in production: the template belongs to the owner role, which runs the migrations; the
  // application role (what createTestApp connects as) gets its grants there, and clones keep them.
  await admin.query(ROLES_SQL);
  await admin.query(`CREATE DATABASE ${templateDb} OWNER ${OWNER_ROLE}`);
  const templateUrl = pgUrl!.replace(/\/[^/]*$/, `/${templateDb}`);
  await migrateDatabase({ migrationUrl: urlAsRole(templateUrl, OWNER_ROLE), appRole: APP_ROLE });
  // The template carries the migrations and the invented demo scenario, so each test file's clone starts
  // seeded without paying for it (the certificate seeder signs with the test secrets folder's key).
  process.env.SECRETS_DIR = secretsDir;
  // The time-stamping authority runs before the seed: the demo certificate is time-stamped too.
  const tsa = await startFakeTsa({ port: 0, keysDir: path.join(secretsDir, 'tsa') });
  process.env.TSA_URL = tsa.url;
  process.env.TSA_ROOT_CERT_FILE = tsa.rootCertFile;
  const tpl = await openDatabase(urlAsRole(templateUrl, APP_ROLE), { migrate: false });
  await seedDemo(tpl);
  await tpl.destroy();
  await admin.destroy();

  const idp = await startFakeIdp({ port: 0, keysDir: path.join(secretsDir, 'idp') });
  const smtp = await startFakeSmtp({ smtpPort: 0, httpPort: 0 });

  project.provide('pgAdminUrl', pgUrl!);
  project.provide('templateDb', templateDb);
  project.provide('idpUrl', idp.url);
  project.provide('idpCertFile', path.join(secretsDir, 'idp', 'idp-cert.pem'));
  project.provide('secretsDir', secretsDir);
  project.provide('smtpUrl', smtp.smtpUrl);
  project.provide('mailboxUrl', smtp.mailboxUrl);
  project.provide('tsaUrl', tsa.url);
  project.provide('tsaRootCertFile', tsa.rootCertFile);

  return async () => {
    await idp.close();
    await smtp.close();
    await tsa.close();
    stopPg();
    fs.rmSync(tmp, { recursive: true, force: true });
  };
}
