// `npm run admin -- users` lists people; `npm run admin -- token --email <e-mail> [--name <what for>]` prints a new
// API token once, on a line of its own. Uses DATABASE_URL, or the local cluster that `npm start` runs.
//   audit-verify                      walks the audit chain; exit 1 and the first broken event when it is broken
//   audit-checkpoint                  writes a checkpoint of the current chain head
//   backup [--out <file>]             pg_dump -Fc of the database (as the owner role: MIGRATION_DATABASE_URL)
//   restore <file> [--database <n>]   pg_restore into a NEW database (ADMIN_DATABASE_URL: a role that may create it)
//   scale-demo                        scales the demo up (50 institutes, 500 people, 10 000 campaigns, …) for load tests
// `npm run admin -- extract <certificate.pdf> [--out <folder>]` writes the files embedded in a certificate (the
// snapshot JSON and the result CSV) and needs no database. `npm run admin -- publish-crl` issues a fresh CRL
// (run it daily from a timer so the published CRL never runs out).
import { mkdirSync, readFileSync, writeFileSync } from 'node:fs';
import path from 'node:path';
import { parseArgs } from 'node:util';
import { readAttachments } from '../certificates/pdf/attachments';
import { createPkiService } from '../certificates/pki.service';
import { loadConfig } from '../config';
import { openDatabase } from '../db/data-source';
import { UserEntity } from '../db/entities/core.entities';
import { issueToken } from '../tokens/tokens.service';
import { formatAuditReport, verifyAuditChain, writeAuditCheckpoint } from '../audit/verify';
import { backupDatabase, restoreDatabase } from '../db/backup';
import { defaultScaleTargets, scaleDemo } from '../../seeds/scale.seed';

const { positionals, values } = parseArgs({
  allowPositionals: true,
  options: {
    email: { type: 'string' }, name: { type: 'string', default: 'command line' },
    out: { type: 'string' }, database: { type: 'string' },
  },
});

if (positionals[0] === 'extract') {
  // Offline: reads the file only. The embedded files are taken from the revision the signature covers.
  const file = positionals[1];
  if (!file) {
    console.error('usage: npm run admin -- extract <certificate.pdf> [--out <folder>]');
    process.exit(2);
  }
  try {
    const pdf = readFileSync(file);
    const range = /\/ByteRange\s*\[\s*0\s+\d+\s+(\d+)\s+(\d+)\s*\]/.exec(pdf.toString('latin1'));
    const signedEnd = range ? Number(range[1]) + Number(range[2]) : pdf.length;
    const attachments = readAttachments(pdf.subarray(0, Math.min(signedEnd, pdf.length)));
    if (attachments.length === 0) console.error(`${file} carries no embedded files${range ? '' : ' (and no signature)'}`);
    const out = values.out ?? path.dirname(path.resolve(file));
    mkdirSync(out, { recursive: true });
    for (const a of attachments) {
      // Only the file name, never a path from inside the PDF.
      const target = path.join(out, path.basename(a.name).replace(/[^\w.@+-]/g, '_'));
      writeFileSync(target, a.data);
      console.log(`${target}\t${a.relationship ?? '-'}\t${a.mime ?? '-'}\t${a.bytes} bytes\tsha256 ${a.sha256}${range ? '\tinside the signed revision' : ''}`);
    }
    process.exit(0);
  } catch (e) {
    console.error(`error: ${(e as Error).message}`);
    process.exit(1);
  }
}
const LOCAL = 'postgres://chronolevel_app@127.0.0.1:55432/chronolevel';
process.env.DATABASE_URL ||= LOCAL;
const migrationUrl = process.env.MIGRATION_DATABASE_URL || (process.env.DATABASE_URL === LOCAL ? LOCAL.replace('chronolevel_app@', 'chronolevel_owner@') : process.env.DATABASE_URL);
const config = loadConfig();
const command = positionals[0];
let code = 0;

if (command === 'backup' || command === 'restore') {
  try {
    if (command === 'backup') {
      const r = await backupDatabase({ databaseUrl: migrationUrl, out: values.out });
      console.error(`backup written: ${r.file} (${r.bytes} bytes, ${r.seconds.toFixed(1)} s)`);
      console.log(r.file);
    } else {
      const file = positionals[1];
      if (!file) throw new Error('restore needs the backup file: npm run admin -- restore <file> [--database <name>]');
      const adminUrl = process.env.ADMIN_DATABASE_URL || 'postgres://chronolevel@127.0.0.1:55432/postgres';
      const r = await restoreDatabase({ adminUrl, file, database: values.database, owner: new URL(migrationUrl).username || undefined });
      console.error(`restored into database ${r.database} (${r.seconds.toFixed(1)} s); point DATABASE_URL at it to use it`);
      console.log(r.database);
    }
  } catch (e) {
    console.error(`error: ${(e as Error).message}`);
    code = 1;
  }
  process.exit(code);
}

const ds = await openDatabase(config.databaseUrl, { migrate: false }).catch((e: Error) => {
  console.error(`error: cannot reach the database (${e.message}). Is \`npm start\` running, or is DATABASE_URL set?`);
  process.exit(1);
});
try {
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
  } else if (command === 'audit-verify') {
    const report = await verifyAuditChain(ds);
    console.log(formatAuditReport(report));
    code = report.ok ? 0 : 1;
  } else if (command === 'audit-checkpoint') {
    const id = await writeAuditCheckpoint(ds, 'command line');
    console.log(id ? `checkpoint ${id} written` : 'no new events since the last checkpoint');
  } else if (command === 'scale-demo') {
    // Scales the invented demo up for load and volume measurements (seeds/scale.seed.ts).
    const sizes = await scaleDemo(ds, defaultScaleTargets, (m) => console.error(m));
    console.log(JSON.stringify(sizes));
  } else if (command === 'publish-crl') {
    const crl = await createPkiService(ds, config).publishCrl();
    if (!crl) throw new Error('the signing key comes from a configured P12; its CA publishes the CRLs');
    console.log(`CRL ${crl.number} published, valid until ${crl.nextUpdate.toISOString()}`);
  } else {
    console.error('usage: npm run admin -- users | token --email <e-mail> [--name <what for>] | audit-verify | audit-checkpoint | backup [--out <file>] | restore <file> [--database <name>] | extract <certificate.pdf> [--out <folder>] | publish-crl | scale-demo');
    code = 2;
  }
} catch (e) {
  console.error(`error: ${(e as Error).message}`);
  code = 1;
} finally {
  await ds.destroy();
}
process.exit(code);
