import PgBoss from 'pg-boss';
import type { DataSource } from 'typeorm';
import { openDatabase } from './data-source';

// Migrations run as the owner role; the application connects as a role with ordinary DML that may only INSERT
// and SELECT on the audit tables. This module applies that split to a database after its migrations, and tells a
// running application when its own connection holds more privilege than that (docs/operations.md, "Database roles").

const AUDIT_TABLES = ['audit_event', 'audit_checkpoint'];

function quoteIdent(name: string): string {
  return `"${name.replace(/"/g, '""')}"`;
}

/** The user name in a postgres:// URL. */
export function roleOfUrl(url: string): string {
  return decodeURIComponent(new URL(url).username);
}

/**
 * Grants the application role what it needs, and no more, on every table the migrations made (idempotent; run after
 * every migration so tables added later are covered too). Executed by the owner role.
 */
export async function applyAppGrants(owner: DataSource, appRole: string): Promise<void> {
  const app = quoteIdent(appRole);
  const [me] = await owner.query(`SELECT current_user AS name`);
  if (me.name === appRole) return; // one URL for both: nothing to split (the health check warns)
  await owner.query(`GRANT USAGE ON SCHEMA public TO ${app}`);
  await owner.query(`GRANT SELECT, INSERT, UPDATE, DELETE ON ALL TABLES IN SCHEMA public TO ${app}`);
  await owner.query(`REVOKE TRUNCATE, REFERENCES, TRIGGER ON ALL TABLES IN SCHEMA public FROM ${app}`);
  await owner.query(`REVOKE INSERT, UPDATE, DELETE ON schema_migration FROM ${app}`);
  const audit = (await owner.query(`SELECT relname FROM pg_class WHERE relname = ANY($1) AND relnamespace = 'public'::regnamespace`, [AUDIT_TABLES])) as { relname: string }[];
  for (const t of audit) await owner.query(`REVOKE UPDATE, DELETE, TRUNCATE ON ${quoteIdent(t.relname)} FROM ${app}, PUBLIC`);
  await owner.query(`GRANT USAGE, SELECT ON ALL SEQUENCES IN SCHEMA public TO ${app}`);
  await owner.query(`ALTER DEFAULT PRIVILEGES IN SCHEMA public GRANT SELECT, INSERT, UPDATE, DELETE ON TABLES TO ${app}`);
  await owner.query(`ALTER DEFAULT PRIVILEGES IN SCHEMA public GRANT USAGE, SELECT ON SEQUENCES TO ${app}`);
}

/**
 * pg-boss creates its schema on first start and a table per queue later, so the application role must own that
 * schema. The owner installs it (the application role may not create schemas) and hands it over.
 */
async function installJobSchema(owner: DataSource, migrationUrl: string, appRole: string): Promise<void> {
  const [state] = await owner.query(
    `SELECT to_regclass('pgboss.version') IS NOT NULL AS installed,
            (SELECT pg_get_userbyid(nspowner) FROM pg_namespace WHERE nspname = 'pgboss') AS schema_owner,
            current_user AS me, pg_has_role(current_user, $1, 'MEMBER') AS may_hand_over`,
    [appRole],
  );
  if (state.me === appRole) return;
  if (!state.installed) {
    const boss = new PgBoss({ connectionString: migrationUrl, max: 2, supervise: false, schedule: false, application_name: 'chronolevel-migrate' });
    boss.on('error', () => undefined);
    await boss.start();
    await boss.stop({ graceful: false, wait: true });
  }
  if (state.schema_owner === appRole) return;
  if (!state.may_hand_over) {
    throw new Error(`the migration role ${state.me} must be a member of ${appRole} to hand it the job schema (GRANT ${appRole} TO ${state.me})`);
  }
  const app = quoteIdent(appRole);
  await owner.query(`ALTER SCHEMA pgboss OWNER TO ${app}`);
  const tables = (await owner.query(`SELECT c.relname FROM pg_class c WHERE c.relnamespace = 'pgboss'::regnamespace AND c.relkind IN ('r','p')`)) as { relname: string }[];
  for (const t of tables) await owner.query(`ALTER TABLE pgboss.${quoteIdent(t.relname)} OWNER TO ${app}`);
  const fns = (await owner.query(`SELECT p.oid::regprocedure::text AS fn FROM pg_proc p WHERE p.pronamespace = 'pgboss'::regnamespace`)) as { fn: string }[];
  for (const f of fns) await owner.query(`ALTER FUNCTION ${f.fn} OWNER TO ${app}`);
  const types = (await owner.query(`SELECT typname FROM pg_type WHERE typnamespace = 'pgboss'::regnamespace AND typtype = 'e'`)) as { typname: string }[];
  for (const t of types) await owner.query(`ALTER TYPE pgboss.${quoteIdent(t.typname)} OWNER TO ${app}`);
}

/** Migrations, the job schema and the application role's grants, all as the owner role. */
export async function migrateDatabase(opts: { migrationUrl: string; appRole: string }): Promise<void> {
  const owner = await openDatabase(opts.migrationUrl);
  try {
    await installJobSchema(owner, opts.migrationUrl, opts.appRole);
    await applyAppGrants(owner, opts.appRole);
  } finally {
    await owner.destroy();
  }
}

const warningsCache = new WeakMap<DataSource, Promise<string[]>>();

/**
 * What is wrong with the privileges of this connection, in words for the log and /api/health: empty when the
 * application cannot rewrite or delete audit events nor switch their triggers off.
 */
export function privilegeWarnings(ds: DataSource): Promise<string[]> {
  let p = warningsCache.get(ds);
  if (!p) {
    p = (async () => {
      const [r] = await ds.query(
        `SELECT current_user AS name, r.rolsuper AS super,
                c.oid IS NOT NULL AS has_audit,
                coalesce(pg_has_role(current_user, c.relowner, 'USAGE'), false) AS owns_audit,
                coalesce(has_table_privilege(c.oid, 'UPDATE') OR has_table_privilege(c.oid, 'DELETE') OR has_table_privilege(c.oid, 'TRUNCATE'), false) AS may_rewrite
           FROM pg_roles r LEFT JOIN pg_class c ON c.oid = to_regclass('public.audit_event') WHERE r.rolname = current_user`,
      );
      const why: string[] = [];
      if (r.super) why.push(`it is a superuser`);
      if (r.has_audit && r.owns_audit) why.push('it owns the audit table (it may ALTER it and DISABLE its triggers)');
      if (r.has_audit && r.may_rewrite) why.push('it may UPDATE, DELETE or TRUNCATE audit events');
      if (!why.length) return [];
      return [
        `The audit trail is not protected: the application connects to PostgreSQL as "${r.name}", and ${why.join('; ')}. ` +
          'Give migrations their own role in MIGRATION_DATABASE_URL and the application a restricted role in DATABASE_URL (docs/operations.md, "Database roles").',
      ];
    })();
    p.catch(() => warningsCache.delete(ds));
    warningsCache.set(ds, p);
  }
  return p;
}
