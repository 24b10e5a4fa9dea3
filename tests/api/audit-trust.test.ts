import { spawnSync } from 'node:child_process';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { openDatabase } from '../../server/db/data-source';
import { verifyAuditChain, canonicalAuditV1, type AuditChainRow } from '../../server/audit/verify';
import { createTestApp, type TestApp } from '../helpers/test-app';
import { createApp } from '../../server/app';

// The audit trail must hold against the application itself (it connects as a role that may only INSERT and
// SELECT on audit tables) and tampering by the schema owner must be found by the verifier.

let t: TestApp;
beforeAll(async () => {
  t = await createTestApp();
});
afterAll(() => t.close());

/** Runs statements as the owner role in this test's database, with the append-only triggers off (a tamperer). */
async function asOwnerTampering(app: TestApp, sql: string[]): Promise<void> {
  const owner = await openDatabase(app.ownerUrl, { migrate: false });
  try {
    await owner.query('ALTER TABLE audit_event DISABLE TRIGGER USER');
    await owner.query('ALTER TABLE audit_checkpoint DISABLE TRIGGER USER');
    for (const s of sql) await owner.query(s);
  } finally {
    await owner.query('ALTER TABLE audit_event ENABLE TRIGGER USER');
    await owner.query('ALTER TABLE audit_checkpoint ENABLE TRIGGER USER');
    await owner.destroy();
  }
}

describe('the application role', () => {
  it('is neither superuser nor owner of the audit tables, and keeps its grants in a database cloned from the template', async () => {
    const [me] = await t.ds.query(
      `SELECT current_user AS name, r.rolsuper AS super,
              pg_has_role(current_user, c.relowner, 'USAGE') AS owns_audit,
              has_table_privilege('audit_event', 'INSERT') AS ins, has_table_privilege('audit_event', 'SELECT') AS sel,
              has_table_privilege('audit_event', 'UPDATE') AS upd, has_table_privilege('audit_event', 'DELETE') AS del,
              has_table_privilege('audit_event', 'TRUNCATE') AS trunc,
              has_table_privilege('audit_checkpoint', 'INSERT') AS cp_ins, has_table_privilege('audit_checkpoint', 'UPDATE') AS cp_upd,
              has_table_privilege('campaign', 'UPDATE') AS campaign_upd
         FROM pg_roles r, pg_class c WHERE r.rolname = current_user AND c.relname = 'audit_event'`,
    );
    expect(me).toEqual({ name: 'chronolevel_app', super: false, owns_audit: false, ins: true, sel: true, upd: false, del: false, trunc: false, cp_ins: true, cp_upd: false, campaign_upd: true });
  });

  it.each([
    ["UPDATE audit_event SET action = 'x'"],
    ['DELETE FROM audit_event'],
    ['TRUNCATE audit_event'],
    ['ALTER TABLE audit_event DISABLE TRIGGER audit_event_no_update'],
    ['ALTER TABLE audit_event DISABLE TRIGGER USER'],
    ['ALTER TABLE audit_event ADD COLUMN note text'],
    ["UPDATE audit_checkpoint SET head_hash = 'x'"],
    ['DELETE FROM audit_checkpoint'],
    ['ALTER TABLE audit_checkpoint DISABLE TRIGGER USER'],
    ["CREATE OR REPLACE FUNCTION audit_event_immutable() RETURNS trigger LANGUAGE plpgsql AS $$ BEGIN RETURN NEW; END $$"],
  ])('is refused by PostgreSQL itself (not only a trigger): %s', async (sql) => {
    await expect(t.ds.query(sql)).rejects.toMatchObject({ code: '42501' });
  });

  it('can still append events, and each one lands in the chain', async () => {
    const before = await verifyAuditChain(t.ds);
    expect(before.ok).toBe(true);
    await t.ds.query(`INSERT INTO audit_event (actor_label, action, entity_type, institute_id, hash, prev_hash) VALUES ('test', 'probe', 'test', NULL, 'forged', 'forged')`);
    const after = await verifyAuditChain(t.ds);
    expect(after.ok).toBe(true);
    expect(after.events).toBe(before.events + 1);
  });
});

describe('the chain covers every column', () => {
  it('names every column of audit_event in the canonical form (a new column would be reported unhashed)', async () => {
    const report = await verifyAuditChain(t.ds);
    expect(report.unhashedColumns).toEqual([]);
    expect(report.ok).toBe(true);
  });

  it('the version-1 canonical form reproduces hashes made by the original trigger formula', async () => {
    // The original (version 1) formula, as PostgreSQL computed it before institute_id and prev_hash were covered.
    const [row] = await t.ds.query(`
      SELECT id::text, to_char(at AT TIME ZONE 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.US') AS at_v1, actor_user_id::text, actor_label, action,
             entity_type, entity_id, institute_id::text, details::text AS details, prev_hash,
             encode(sha256(convert_to(coalesce(prev_hash, '') || '|' || id::text || '|' || to_char(at AT TIME ZONE 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.US') || '|' ||
               coalesce(actor_user_id::text, '') || '|' || actor_label || '|' || action || '|' || entity_type || '|' ||
               coalesce(entity_id, '') || '|' || details::text, 'UTF8')), 'hex') AS v1
        FROM audit_event ORDER BY id DESC LIMIT 1`);
    const r = row as AuditChainRow & { at_v1: string; v1: string };
    expect(canonicalAuditV1({ ...r, at: r.at_v1 })).toBe(r.v1);
  });
});

describe('the verifier finds tampering by the owner', () => {
  it('an intact trail verifies, from the command line too (exit 0)', async () => {
    const report = await verifyAuditChain(t.ds);
    expect(report).toMatchObject({ ok: true, firstBreak: null });
    const cli = runAuditVerify(t.databaseUrl);
    expect(cli.status).toBe(0);
    expect(cli.stdout).toMatch(/audit trail intact/);
  });

  it('an updated institute_id is found (it is inside the hash now)', async () => {
    const c = await createTestApp({ seed: false });
    try {
      const [victim] = await c.ds.query(`SELECT id FROM audit_event WHERE institute_id IS NOT NULL ORDER BY id LIMIT 1 OFFSET 2`);
      const [pos] = await c.ds.query(`SELECT count(*)::int AS n FROM audit_event WHERE id <= $1`, [victim.id]);
      await asOwnerTampering(c, [`UPDATE audit_event SET institute_id = (SELECT i.id FROM institute i WHERE i.id <> audit_event.institute_id ORDER BY i.code LIMIT 1) WHERE id = ${victim.id}`]);
      const report = await verifyAuditChain(c.ds);
      expect(report.ok).toBe(false);
      expect(report.firstBreak).toMatchObject({ eventId: String(victim.id), position: pos.n, problem: 'content-altered' });
      const cli = runAuditVerify(c.databaseUrl);
      expect(cli.status).toBe(1);
      expect(cli.stdout).toContain(`event ${victim.id}`);
      expect(cli.stdout).toContain(`position ${pos.n}`);
    } finally {
      await c.close();
    }
  });

  it('an updated field whose hash was recomputed breaks the link to the next event', async () => {
    const c = await createTestApp({ seed: false });
    try {
      const rows: { id: string }[] = await c.ds.query(`SELECT id FROM audit_event ORDER BY id DESC LIMIT 3`);
      const victim = rows[2].id;
      const next = rows[1].id;
      // Re-hash the altered row with the same canonical form the trigger uses, as a careful tamperer would.
      await asOwnerTampering(c, [
        `UPDATE audit_event SET actor_label = 'someone else' WHERE id = ${victim}`,
        `UPDATE audit_event SET hash = audit_event_hash_v2(audit_event) WHERE id = ${victim}`,
      ]);
      const report = await verifyAuditChain(c.ds);
      expect(report.ok).toBe(false);
      expect(report.firstBreak).toMatchObject({ eventId: next, problem: 'link-broken' });
      expect(report.firstBreak!.detail).toMatch(new RegExp(`event ${victim}`));
    } finally {
      await c.close();
    }
  });

  it('rewriting an event and re-chaining every later one is found through the checkpoint and the certificate anchors', async () => {
    const c = await createTestApp({ seed: false });
    try {
      await c.ds.query(`SELECT audit_write_checkpoint('manual')`);
      const [first] = await c.ds.query(`SELECT min(id)::text AS id FROM audit_event`);
      await asOwnerTampering(c, [
        `UPDATE audit_event SET details = '{"rewritten": true}' WHERE id = ${first.id}`,
        `DO $$ DECLARE r record; prev text := NULL; BEGIN
           FOR r IN SELECT id FROM audit_event ORDER BY id LOOP
             UPDATE audit_event SET prev_hash = prev WHERE id = r.id;
             UPDATE audit_event SET hash = audit_event_hash_v2(audit_event) WHERE id = r.id RETURNING hash INTO prev;
           END LOOP; END $$`,
      ]);
      const report = await verifyAuditChain(c.ds);
      expect(report.ok).toBe(false);
      const problems = report.breaks.map((b) => b.problem);
      expect(problems).not.toContain('content-altered');
      expect(problems).not.toContain('link-broken');
      expect(problems).toContain('checkpoint-head-changed');
      expect(problems).toContain('certificate-anchor-missing');
    } finally {
      await c.close();
    }
  });

  it('deleting the newest events is found through the latest checkpoint', async () => {
    const c = await createTestApp({ seed: false });
    try {
      await c.ds.query(`SELECT audit_write_checkpoint('manual')`);
      const [cp] = await c.ds.query(`SELECT head_event_id::text AS head FROM audit_checkpoint ORDER BY id DESC LIMIT 1`);
      await asOwnerTampering(c, [`DELETE FROM audit_event WHERE id >= (SELECT id FROM audit_event ORDER BY id DESC LIMIT 1 OFFSET 1)`]);
      const report = await verifyAuditChain(c.ds);
      expect(report.ok).toBe(false);
      expect(report.breaks.map((b) => b.problem)).toContain('checkpoint-head-missing');
      expect(report.breaks.find((b) => b.problem === 'checkpoint-head-missing')!.eventId).toBe(cp.head);
      expect(runAuditVerify(c.databaseUrl).status).toBe(1);
    } finally {
      await c.close();
    }
  });

  it('truncating the trail back to before a checkpoint is found, also through the head anchored in a certificate', async () => {
    const c = await createTestApp();
    try {
      // The demo scenario holds signed certificates; take the one anchoring the newest chain head.
      const [cert] = await c.ds.query(
        `SELECT c.number, e.id FROM certificate c JOIN audit_event e ON e.hash = c.snapshot->>'auditChainHead' ORDER BY e.id DESC LIMIT 1`);
      expect(cert).toBeDefined();
      for (let i = 0; i < 3; i++) await c.ds.query(`INSERT INTO audit_event (actor_label, action, entity_type) VALUES ('test', 'probe', 'test')`);
      await c.ds.query(`SELECT audit_write_checkpoint('manual')`);
      const anchored = { id: cert.id as string };
      // Cut back to the event before the one anchored in the certificate; rewrite nothing else.
      await asOwnerTampering(c, [`DELETE FROM audit_event WHERE id >= ${anchored.id}`]);
      const report = await verifyAuditChain(c.ds);
      expect(report.ok).toBe(false);
      const problems = report.breaks.map((b) => b.problem);
      expect(problems).toContain('checkpoint-head-missing');
      expect(problems).toContain('certificate-anchor-missing');
      expect(report.breaks.find((b) => b.problem === 'certificate-anchor-missing')!.detail).toContain(cert.number);
    } finally {
      await c.close();
    }
  });

  it('a count that does not match the checkpoint (a middle event and the following link rewritten) is found', async () => {
    const c = await createTestApp({ seed: false });
    try {
      await c.ds.query(`SELECT audit_write_checkpoint('manual')`);
      const rows: { id: string }[] = await c.ds.query(`SELECT id FROM audit_event ORDER BY id DESC LIMIT 3`);
      await asOwnerTampering(c, [
        `DELETE FROM audit_event WHERE id = ${rows[1].id}`,
        `UPDATE audit_event SET prev_hash = (SELECT hash FROM audit_event WHERE id = ${rows[2].id}) WHERE id = ${rows[0].id}`,
        `UPDATE audit_event SET hash = audit_event_hash_v2(audit_event) WHERE id = ${rows[0].id}`,
        `UPDATE audit_checkpoint SET head_hash = (SELECT hash FROM audit_event WHERE id = ${rows[0].id})`,
      ]);
      const report = await verifyAuditChain(c.ds);
      expect(report.ok).toBe(false);
      expect(report.breaks.map((b) => b.problem)).toContain('checkpoint-count-mismatch');
    } finally {
      await c.close();
    }
  });
});

describe('checkpoints', () => {
  it('are written on their own every 100 events and are append-only', async () => {
    const [before] = await t.ds.query(`SELECT count(*)::int AS n FROM audit_checkpoint`);
    for (let i = 0; i < 100; i++) await t.ds.query(`INSERT INTO audit_event (actor_label, action, entity_type) VALUES ('test', 'probe', 'test')`);
    const [after] = await t.ds.query(`SELECT count(*)::int AS n FROM audit_checkpoint`);
    expect(after.n).toBeGreaterThan(before.n);
    const [last] = await t.ds.query(`SELECT c.event_count::int AS n, (SELECT count(*)::int FROM audit_event e WHERE e.id <= c.head_event_id) AS actual FROM audit_checkpoint c ORDER BY id DESC LIMIT 1`);
    expect(last.n).toBe(last.actual);
    expect((await verifyAuditChain(t.ds)).ok).toBe(true);
  });
});

describe('health when the application holds too much privilege', () => {
  it('warns in /api/health when the application connects as the owner (one URL for both)', async () => {
    const ownerDs = await openDatabase(t.ownerUrl, { migrate: false });
    const app = createApp({ ...t.deps, dataSource: ownerDs });
    try {
      const res = await request(app).get('/api/health');
      expect(res.status).toBe(200);
      expect(res.body.warnings?.join(' ')).toMatch(/audit trail is not protected/);
      const ok = await request(t.app).get('/api/health');
      expect(ok.body.warnings).toBeUndefined();
    } finally {
      await app.locals.closeSessionPool?.();
      await ownerDs.destroy();
    }
  });
});

function runAuditVerify(databaseUrl: string) {
  return spawnSync(process.execPath, ['--import', 'tsx', 'server/cli/admin.ts', 'audit-verify'], {
    encoding: 'utf8',
    env: { ...process.env, DATABASE_URL: databaseUrl, MIGRATION_DATABASE_URL: '', LOG_LEVEL: 'silent' },
    timeout: 60_000,
  });
}
