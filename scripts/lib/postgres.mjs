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
