import { spawn } from 'node:child_process';
import fs from 'node:fs';
import path from 'node:path';
import pg from 'pg';
// @ts-expect-error plain ESM helper shared with `npm start`
import { ensurePostgresBinaries } from '../../scripts/lib/postgres.mjs';

// Backup and restore with Debian's pg_dump/pg_restore (custom format, -Fc), found the way `npm start` finds the
// server binaries. A restore always goes into a NEW database, so a drill never touches the live one.

function run(tool: string, args: string[], env: NodeJS.ProcessEnv): Promise<void> {
  const bin = path.join(ensurePostgresBinaries(() => undefined) as string, tool);
  return new Promise((resolve, reject) => {
    const p = spawn(bin, args, { env, stdio: ['ignore', 'ignore', 'pipe'] });
    let err = '';
    p.stderr.on('data', (d: Buffer) => (err += d.toString()));
    p.on('error', reject);
    p.on('close', (code) => (code === 0 ? resolve() : reject(new Error(`${tool} failed (exit ${code}): ${err.trim().slice(0, 2000)}`))));
  });
}

/** libpq connection settings from a postgres:// URL (passwords travel in the environment, not the command line). */
function libpqEnv(url: string): NodeJS.ProcessEnv {
  const u = new URL(url);
  return {
    ...process.env,
    PGHOST: u.hostname, PGPORT: u.port || '5432', PGUSER: decodeURIComponent(u.username),
    PGDATABASE: decodeURIComponent(u.pathname.slice(1)),
    ...(u.password ? { PGPASSWORD: decodeURIComponent(u.password) } : {}),
  };
}

export async function backupDatabase(opts: { databaseUrl: string; out?: string }): Promise<{ file: string; bytes: number; seconds: number }> {
  const file = path.resolve(opts.out ?? `chronolevel-${new Date().toISOString().replace(/[:.]/g, '-')}.dump`);
  const started = performance.now();
  await run('pg_dump', ['-Fc', '--file', file], libpqEnv(opts.databaseUrl));
  return { file, bytes: fs.statSync(file).size, seconds: (performance.now() - started) / 1000 };
}

export async function restoreDatabase(opts: { adminUrl: string; file: string; database?: string; owner?: string }): Promise<{ database: string; seconds: number }> {
  if (!fs.existsSync(opts.file)) throw new Error(`no backup file ${opts.file}`);
  const database = opts.database ?? `chronolevel_restore_${new Date().toISOString().replace(/\D/g, '').slice(0, 14)}`;
  if (!/^[a-z_][a-z0-9_]{0,62}$/.test(database)) throw new Error(`database name ${database}: use lower-case letters, digits and _ only`);
  const started = performance.now();
  const admin = new pg.Client({ connectionString: opts.adminUrl });
  await admin.connect();
  try {
    const exists = await admin.query('SELECT 1 FROM pg_database WHERE datname = $1', [database]);
    if (exists.rowCount) throw new Error(`database ${database} already exists; restore goes into a new database (choose --database)`);
    const owner = opts.owner && (await admin.query('SELECT 1 FROM pg_roles WHERE rolname = $1', [opts.owner])).rowCount ? opts.owner : null;
    await admin.query(`CREATE DATABASE "${database}"${owner ? ` OWNER "${owner.replace(/"/g, '""')}"` : ''}`);
  } finally {
    await admin.end();
  }
  const target = new URL(opts.adminUrl);
  target.pathname = `/${database}`;
  // ownership and grants come back as dumped (the roles are cluster-wide), so the application role stays restricted
  await run('pg_restore', ['--exit-on-error', '--no-password', '--dbname', database, opts.file], libpqEnv(target.toString()));
  return { database, seconds: (performance.now() - started) / 1000 };
}
