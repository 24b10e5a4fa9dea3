// `npm run admin -- users` lists people; `npm run admin -- token --email <e-mail> [--name <what for>]` prints a new
// API token once, on a line of its own. Uses DATABASE_URL, or the local cluster that `npm start` runs.
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

const { positionals, values } = parseArgs({
  allowPositionals: true,
  options: { email: { type: 'string' }, name: { type: 'string', default: 'command line' }, out: { type: 'string' } },
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
  } else if (command === 'publish-crl') {
    const crl = await createPkiService(ds, config).publishCrl();
    if (!crl) throw new Error('the signing key comes from a configured P12; its CA publishes the CRLs');
    console.log(`CRL ${crl.number} published, valid until ${crl.nextUpdate.toISOString()}`);
  } else {
    console.error('usage: npm run admin -- users | token --email <e-mail> [--name <what for>] | extract <certificate.pdf> [--out <folder>] | publish-crl');
    code = 2;
  }
} catch (e) {
  console.error(`error: ${(e as Error).message}`);
  code = 1;
} finally {
  await ds.destroy();
}
process.exit(code);
