// Starts and stops a project-local PostgreSQL cluster from Debian's server package.
// Used by `npm start` (data kept in .data/pg) and by the test set-up (temporary folder).
import { execFileSync, spawnSync } from 'node:child_process';
import fs from 'node:fs';
import net from 'node:net';
import path from 'node:path';

const isRoot = typeof process.getuid === 'function' && process.getuid() === 0;

function findBinDir() {
  const root = '/usr/lib/postgresql';
  if (!fs.existsSync(root)) return null;
  const versions = fs
    .readdirSync(root)
    .filter((v) => fs.existsSync(path.join(root, v, 'bin', 'initdb')))
    .sort((a, b) => Number(b) - Number(a));
  return versions.length ? path.join(root, versions[0], 'bin') : null;
}

/** Finds Debian's PostgreSQL server binaries, installing the package with apt-get when missing. */
export function ensurePostgresBinaries(log = console.log) {
  let bin = findBinDir();
  if (bin) return bin;
  if (!isRoot) {
    throw new Error(
      "PostgreSQL server is not installed and this user cannot install it. Run as root, or install Debian's 'postgresql' package, or set DATABASE_URL to an existing server.",
    );
  }
  log('Installing PostgreSQL server from Debian packages (apt-get install postgresql)…');
  const env = { ...process.env, DEBIAN_FRONTEND: 'noninteractive' };
  spawnSync('apt-get', ['update', '-q'], { stdio: 'inherit', env });
  const r = spawnSync('apt-get', ['install', '-y', '-q', 'postgresql'], { stdio: 'inherit', env });
  bin = findBinDir();
  if (r.status !== 0 || !bin) {
    throw new Error("Could not install Debian's PostgreSQL server with apt-get; install 'postgresql' or set DATABASE_URL.");
  }
  return bin;
}

function ensureUnprivilegedUser() {
  const r = spawnSync('id', ['-u', 'postgres']);
  if (r.status === 0) return 'postgres';
  execFileSync('useradd', ['--system', '--no-create-home', '--shell', '/usr/sbin/nologin', 'chronolevel-db']);
  return 'chronolevel-db';
}

/** Runs a PostgreSQL binary, as the unprivileged database user when we are root (PostgreSQL refuses root). */
function runPg(binDir, tool, args, opts = {}) {
  const exe = path.join(binDir, tool);
  if (isRoot) {
    const user = ensureUnprivilegedUser();
    return spawnSync('runuser', ['-u', user, '--', exe, ...args], { encoding: 'utf8', ...opts });
  }
  return spawnSync(exe, args, { encoding: 'utf8', ...opts });
}

export async function freePort(preferred) {
  const tryPort = (port) =>
    new Promise((resolve) => {
      const srv = net.createServer();
      srv.once('error', () => resolve(null));
      srv.listen(port, '127.0.0.1', () => {
        const p = srv.address().port;
        srv.close(() => resolve(p));
      });
    });
  if (preferred) {
    const p = await tryPort(preferred);
    if (p) return p;
  }
  return tryPort(0);
}

/**
 * Starts a cluster in dataDir on 127.0.0.1:port (initialising it on first use) and creates the database.
 * Returns { url, stop }.
 */
export async function startCluster({ dataDir, port, database, log = console.log }) {
  const binDir = ensurePostgresBinaries(log);
  fs.mkdirSync(dataDir, { recursive: true });
  const user = isRoot ? ensureUnprivilegedUser() : null;
  if (isRoot) {
    execFileSync('chown', ['-R', `${user}:`, dataDir]);
    // the database user must be able to reach the data folder through its parents
    let dir = path.dirname(path.resolve(dataDir));
    while (dir !== '/') {
      const mode = fs.statSync(dir).mode;
      if ((mode & 0o001) === 0) fs.chmodSync(dir, mode | 0o001);
      dir = path.dirname(dir);
    }
  }
  fs.chmodSync(dataDir, 0o700);
  if (!fs.existsSync(path.join(dataDir, 'PG_VERSION'))) {
    log(`Initialising PostgreSQL data folder ${dataDir}`);
    const r = runPg(binDir, 'initdb', ['-D', dataDir, '-U', 'chronolevel', '--auth=trust', '--encoding=UTF8', '--locale=C.UTF-8']);
    if (r.status !== 0) throw new Error(`initdb failed: ${r.stderr || r.stdout}`);
  }
  const logFile = path.join(dataDir, 'server.log');
  const opts = `-c listen_addresses=127.0.0.1 -p ${port} -k ${dataDir} -c fsync=${process.env.PG_FSYNC ?? 'on'} -c max_connections=200`;
  const r = runPg(binDir, 'pg_ctl', ['-D', dataDir, '-l', logFile, '-o', opts, '-w', '-t', '60', 'start']);
  if (r.status !== 0) {
    const tail = fs.existsSync(logFile) ? fs.readFileSync(logFile, 'utf8').split('\n').slice(-15).join('\n') : '';
    throw new Error(`PostgreSQL did not start: ${r.stderr || r.stdout}\n${tail}`);
  }
  const created = spawnSync('psql', ['-h', '127.0.0.1', '-p', String(port), '-U', 'chronolevel', '-d', 'postgres', '-tAc',
    `SELECT 1 FROM pg_database WHERE datname='${database}'`], { encoding: 'utf8' });
  if (created.stdout.trim() !== '1') {
    const c = spawnSync('psql', ['-h', '127.0.0.1', '-p', String(port), '-U', 'chronolevel', '-d', 'postgres', '-c', `CREATE DATABASE "${database}"`], { encoding: 'utf8' });
    if (c.status !== 0) throw new Error(`could not create database: ${c.stderr}`);
  }
  const stop = () => {
    runPg(binDir, 'pg_ctl', ['-D', dataDir, '-m', 'fast', '-w', 'stop']);
  };
  return { url: `postgres://chronolevel@127.0.0.1:${port}/${database}`, port, stop };
}

/**
 * A hot standby of a running cluster (started by startCluster) on 127.0.0.1:port: `pg_basebackup -R` (a base backup
 * that writes standby.signal and primary_conninfo) streams from the primary over loopback, then the standby starts.
 * Returns { url, port, stop, start } (start again after a stop: the standby resumes streaming).
 */
export async function startStandby({ primaryPort, dataDir, port, log = console.log }) {
  const binDir = ensurePostgresBinaries(log);
  fs.mkdirSync(path.dirname(dataDir), { recursive: true });
  if (isRoot) {
    const user = ensureUnprivilegedUser();
    fs.mkdirSync(dataDir, { recursive: true });
    execFileSync('chown', ['-R', `${user}:`, dataDir]);
  }
  const b = runPg(binDir, 'pg_basebackup', ['-h', '127.0.0.1', '-p', String(primaryPort), '-U', 'chronolevel', '-D', dataDir, '-R', '-X', 'stream', '-c', 'fast']);
  if (b.status !== 0) throw new Error(`pg_basebackup failed: ${b.stderr || b.stdout}`);
  fs.chmodSync(dataDir, 0o700);
  const logFile = path.join(dataDir, 'server.log');
  const opts = `-c listen_addresses=127.0.0.1 -p ${port} -k ${dataDir} -c fsync=${process.env.PG_FSYNC ?? 'on'} -c max_connections=200 -c hot_standby=on -c wal_receiver_status_interval=1s`;
  const start = () => {
    const r = runPg(binDir, 'pg_ctl', ['-D', dataDir, '-l', logFile, '-o', opts, '-w', '-t', '60', 'start']);
    if (r.status !== 0) {
      const tail = fs.existsSync(logFile) ? fs.readFileSync(logFile, 'utf8').split('\n').slice(-15).join('\n') : '';
      throw new Error(`standby did not start: ${r.stderr || r.stdout}\n${tail}`);
    }
  };
  const stop = () => {
    runPg(binDir, 'pg_ctl', ['-D', dataDir, '-m', 'fast', '-w', 'stop']);
  };
  start();
  return { url: `postgres://chronolevel@127.0.0.1:${port}/postgres`, port, start, stop };
}

// Two roles instead of the superuser (see docs/operations.md, "Database roles"): the owner runs migrations and owns
// the schema; the application role has ordinary DML, but only INSERT and SELECT on the audit tables, and as a
// non-owner cannot ALTER the tables or DISABLE their triggers. Roles are cluster-wide, so databases cloned with
// CREATE DATABASE … TEMPLATE keep them, and the per-table grants travel with the cloned catalogue.
export const OWNER_ROLE = 'chronolevel_owner';
export const APP_ROLE = 'chronolevel_app';

/** Creates both roles once per cluster (idempotent). The owner may hand the job schema to the application role. */
export const ROLES_SQL = `
DO $$ BEGIN
  IF NOT EXISTS (SELECT 1 FROM pg_roles WHERE rolname = '${OWNER_ROLE}') THEN
    CREATE ROLE ${OWNER_ROLE} LOGIN NOSUPERUSER NOCREATEDB NOCREATEROLE NOREPLICATION NOBYPASSRLS;
  END IF;
  IF NOT EXISTS (SELECT 1 FROM pg_roles WHERE rolname = '${APP_ROLE}') THEN
    CREATE ROLE ${APP_ROLE} LOGIN NOSUPERUSER NOCREATEDB NOCREATEROLE NOREPLICATION NOBYPASSRLS;
  END IF;
END $$;
GRANT ${APP_ROLE} TO ${OWNER_ROLE};
`;

/**
 * Run in the application's database by a superuser: makes the owner role own the database and every object an
 * earlier version created as the superuser (an existing .data/pg from before the roles existed).
 */
export const ADOPT_SQL = `
DO $$ DECLARE r record; BEGIN
  EXECUTE format('ALTER DATABASE %I OWNER TO ${OWNER_ROLE}', current_database());
  FOR r IN SELECT n.nspname, c.relname FROM pg_class c JOIN pg_namespace n ON n.oid = c.relnamespace
            WHERE n.nspname = 'public' AND c.relkind IN ('r','p','v','m','f') AND pg_get_userbyid(c.relowner) <> '${OWNER_ROLE}' LOOP
    EXECUTE format('ALTER TABLE %I.%I OWNER TO ${OWNER_ROLE}', r.nspname, r.relname);
  END LOOP;
  FOR r IN SELECT n.nspname, c.relname FROM pg_class c JOIN pg_namespace n ON n.oid = c.relnamespace
            WHERE n.nspname = 'public' AND c.relkind = 'S' AND pg_get_userbyid(c.relowner) <> '${OWNER_ROLE}'
              AND NOT EXISTS (SELECT 1 FROM pg_depend d WHERE d.objid = c.oid AND d.deptype = 'a') LOOP
    EXECUTE format('ALTER SEQUENCE %I.%I OWNER TO ${OWNER_ROLE}', r.nspname, r.relname);
  END LOOP;
  FOR r IN SELECT p.oid::regprocedure AS fn FROM pg_proc p JOIN pg_namespace n ON n.oid = p.pronamespace
            WHERE n.nspname = 'public' AND pg_get_userbyid(p.proowner) <> '${OWNER_ROLE}' LOOP
    EXECUTE format('ALTER FUNCTION %s OWNER TO ${OWNER_ROLE}', r.fn);
  END LOOP;
  -- the job queue's schema belongs to the application role (pg-boss creates a table per queue)
  IF EXISTS (SELECT 1 FROM pg_namespace WHERE nspname = 'pgboss' AND pg_get_userbyid(nspowner) <> '${APP_ROLE}') THEN
    ALTER SCHEMA pgboss OWNER TO ${APP_ROLE};
    FOR r IN SELECT c.relname FROM pg_class c JOIN pg_namespace n ON n.oid = c.relnamespace
              WHERE n.nspname = 'pgboss' AND c.relkind IN ('r','p') LOOP
      EXECUTE format('ALTER TABLE pgboss.%I OWNER TO ${APP_ROLE}', r.relname);
    END LOOP;
    FOR r IN SELECT p.oid::regprocedure AS fn FROM pg_proc p JOIN pg_namespace n ON n.oid = p.pronamespace WHERE n.nspname = 'pgboss' LOOP
      EXECUTE format('ALTER FUNCTION %s OWNER TO ${APP_ROLE}', r.fn);
    END LOOP;
    FOR r IN SELECT t.typname FROM pg_type t JOIN pg_namespace n ON n.oid = t.typnamespace WHERE n.nspname = 'pgboss' AND t.typtype = 'e' LOOP
      EXECUTE format('ALTER TYPE pgboss.%I OWNER TO ${APP_ROLE}', r.typname);
    END LOOP;
  END IF;
END $$;
`;

/** The same URL with another user name. */
export function urlAsRole(url, role) {
  const u = new URL(url);
  u.username = role;
  u.password = '';
  return u.toString();
}

/**
 * Creates the two roles and hands the database to the owner (superuser connection on the local cluster).
 * Returns { migrationUrl, appUrl }.
 */
export function prepareRoles({ port, database }) {
  const psql = (db, sql) => {
    const r = spawnSync('psql', ['-h', '127.0.0.1', '-p', String(port), '-U', 'chronolevel', '-d', db, '-v', 'ON_ERROR_STOP=1', '-qc', sql], { encoding: 'utf8' });
    if (r.status !== 0) throw new Error(`could not set up database roles: ${r.stderr}`);
  };
  psql('postgres', ROLES_SQL);
  psql(database, ADOPT_SQL);
  const base = `postgres://chronolevel@127.0.0.1:${port}/${database}`;
  return { migrationUrl: urlAsRole(base, OWNER_ROLE), appUrl: urlAsRole(base, APP_ROLE) };
}
