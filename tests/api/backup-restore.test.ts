import { spawnSync } from 'node:child_process';
import crypto from 'node:crypto';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import type { DataSource } from 'typeorm';
import { afterAll, beforeAll, describe, expect, it, inject } from 'vitest';
import { verifyAuditChain } from '../../server/audit/verify';
import { trustAnchors } from '../../server/certificates/verification.service';
import { verifySignedPdf } from '../../server/certificates/pdf/verify-pdf';
import { openDatabase } from '../../server/db/data-source';
import { createTestApp, type TestApp } from '../helpers/test-app';
// @ts-expect-error plain ESM helper shared with `npm start`
import { APP_ROLE, urlAsRole } from '../../scripts/lib/postgres.mjs';

// Backup and restore drill: `npm run admin -- backup` then `restore` into a new database; every table must come
// back with the same rows (count and an md5 over the ordered rows), the audit chain must verify and every signed
// certificate PDF must verify against the pinned institute certificate, in the restored database.

let t: TestApp;
let restored: DataSource | null = null;
let restoredName = '';
const tmp = fs.mkdtempSync(path.join(os.tmpdir(), 'chronolevel-backup-'));
beforeAll(async () => {
  t = await createTestApp();
});
afterAll(async () => {
  await restored?.destroy();
  if (restoredName) {
    const admin = await openDatabase(inject('pgAdminUrl'), { migrate: false });
    await admin.query(`DROP DATABASE IF EXISTS ${restoredName} WITH (FORCE)`);
    await admin.destroy();
  }
  await t.close();
  fs.rmSync(tmp, { recursive: true, force: true });
});

function admin(args: string[]) {
  return spawnSync(process.execPath, ['--import', 'tsx', 'server/cli/admin.ts', ...args], {
    encoding: 'utf8', timeout: 300_000,
    env: { ...process.env, DATABASE_URL: t.databaseUrl, MIGRATION_DATABASE_URL: t.ownerUrl, ADMIN_DATABASE_URL: inject('pgAdminUrl'), LOG_LEVEL: 'silent' },
  });
}

/** Row count and md5 over the rows (as text, in order) of every table in the application's schemas. */
async function fingerprint(ds: DataSource): Promise<Map<string, { rows: number; md5: string | null }>> {
  const tables: { schema: string; name: string }[] = await ds.query(
    `SELECT n.nspname AS schema, c.relname AS name FROM pg_class c JOIN pg_namespace n ON n.oid = c.relnamespace
      WHERE n.nspname IN ('public', 'pgboss') AND c.relkind IN ('r', 'p') AND NOT c.relispartition ORDER BY 1, 2`,
  );
  const out = new Map<string, { rows: number; md5: string | null }>();
  for (const tb of tables) {
    const q = `"${tb.schema}"."${tb.name}"`;
    const [r] = await ds.query(`SELECT count(*)::int AS rows, md5(string_agg(x::text, E'\\n' ORDER BY x::text)) AS md5 FROM ${q} x`);
    out.set(`${tb.schema}.${tb.name}`, r);
  }
  return out;
}

describe('backup and restore drill', () => {
  it('restores into a new database with the same rows, a verifying audit chain and verifying certificates', async () => {
    const before = await fingerprint(t.ds);
    const file = path.join(tmp, 'drill.dump');
    const backup = admin(['backup', '--out', file]);
    expect(backup.status, backup.stderr).toBe(0);
    expect(fs.statSync(file).size).toBeGreaterThan(0);
    restoredName = `r_${crypto.randomBytes(5).toString('hex')}`;
    const restore = admin(['restore', file, '--database', restoredName]);
    expect(restore.status, restore.stderr).toBe(0);
    expect(restore.stdout.trim()).toBe(restoredName);

    const url = urlAsRole(t.databaseUrl.replace(/\/[^/]*$/, `/${restoredName}`), APP_ROLE) as string;
    restored = await openDatabase(url, { migrate: false });
    const after = await fingerprint(restored);
    expect([...after.keys()]).toEqual([...before.keys()]);
    expect(before.get('public.audit_event')!.rows).toBeGreaterThan(0);
    expect(before.get('public.certificate')!.rows).toBeGreaterThan(0);
    for (const [table, fp] of before) expect({ table, ...after.get(table) }).toEqual({ table, ...fp });

    // the audit chain verifies in the copy, with the application role as restricted as before
    const chain = await verifyAuditChain(restored);
    expect(chain.ok).toBe(true);
    expect(chain.events).toBe(before.get('public.audit_event')!.rows);
    const [priv] = await restored.query(`SELECT has_table_privilege('audit_event', 'UPDATE') AS upd, has_table_privilege('audit_event', 'INSERT') AS ins`);
    expect(priv).toEqual({ upd: false, ins: true });

    // every certificate PDF still verifies against the institute root (PAdES chain, time-stamps, CRLs) and matches its registered SHA-256
    // trust anchors (institute root, TSA roots, newest CRL) read from the restored database
    const anchors = await trustAnchors(restored.manager, t.config);
    const certs: { number: string; pdf: Buffer; pdf_sha256: string }[] = await restored.query(`SELECT number, pdf, pdf_sha256 FROM certificate ORDER BY number`);
    for (const c of certs) {
      expect(crypto.createHash('sha256').update(c.pdf).digest('hex'), c.number).toBe(c.pdf_sha256);
      const v = await verifySignedPdf(c.pdf, anchors);
      expect({ number: c.number, status: v.status }).toEqual({ number: c.number, status: 'valid' });
    }
  }, 300_000);

  it('refuses to restore over an existing database', () => {
    const file = path.join(tmp, 'drill.dump');
    const again = admin(['restore', file, '--database', restoredName]);
    expect(again.status).toBe(1);
    expect(again.stderr).toMatch(/already exists/);
  });
});
