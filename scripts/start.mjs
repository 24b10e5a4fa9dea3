// `npm start`: everything needed to run Chronolevel on one machine, with an embedded default set-up.
// Installs missing npm packages and Debian's PostgreSQL, starts PostgreSQL on loopback with data in .data/pg,
// builds the client when its sources changed, applies migrations, then runs the HTTP server (demo seed happens there)
// and one worker process beside it (jobs, mail, audit checkpoints). Ctrl-C stops both; if either dies, both stop.
import { spawn, spawnSync } from 'node:child_process';
import fs from 'node:fs';
import path from 'node:path';
import { ensureNodeModules } from './lib/setup.mjs';

const say = (m) => console.log(`[chronolevel] ${m}`);
process.chdir(path.dirname(path.dirname(new URL(import.meta.url).pathname)));

ensureNodeModules(say);
const { startCluster, prepareRoles } = await import('./lib/postgres.mjs');

const port = Number(process.env.PORT ?? 8080);
const env = { ...process.env, PORT: String(port), NODE_ENV: process.env.NODE_ENV ?? 'production' };
let cluster = null;
if (!env.DATABASE_URL) {
  const pgPort = Number(process.env.PGPORT_LOCAL ?? 55432);
  cluster = await startCluster({ dataDir: path.resolve('.data/pg'), port: pgPort, database: 'chronolevel', log: say });
  // migrations as the owner role, the server as the restricted application role (docs/operations.md, "Database roles")
  const roles = prepareRoles({ port: pgPort, database: 'chronolevel' });
  env.MIGRATION_DATABASE_URL = roles.migrationUrl;
  env.DATABASE_URL = roles.appUrl;
  say(`PostgreSQL running on 127.0.0.1:${pgPort} (data in .data/pg)`);
} else {
  say('Using the database in DATABASE_URL');
}
if (env.MIGRATION_DATABASE_URL) {
  // a process of its own, so the server never holds the owner's credentials
  say('Applying migrations as the owner role (MIGRATION_DATABASE_URL)…');
  const m = spawnSync(process.execPath, ['--import', 'tsx', 'server/db/migrate.ts'], { stdio: 'inherit', env });
  if (m.status !== 0) {
    cluster?.stop();
    process.exit(1);
  }
  delete env.MIGRATION_DATABASE_URL;
  env.CHRONOLEVEL_MIGRATED = '1';
} else {
  say('WARNING: only DATABASE_URL is set, so migrations and the application share one role; the audit trail is protected only if that role is restricted. Set MIGRATION_DATABASE_URL for the owner role (docs/operations.md).');
}

function newestMtime(dir) {
  let newest = 0;
  for (const e of fs.readdirSync(dir, { withFileTypes: true })) {
    const p = path.join(dir, e.name);
    newest = Math.max(newest, e.isDirectory() ? newestMtime(p) : fs.statSync(p).mtimeMs);
  }
  return newest;
}
const builtIndex = 'dist/client/index.html';
const sources = Math.max(newestMtime('src'), newestMtime('shared'), fs.statSync('index.html').mtimeMs, fs.statSync('vite.config.ts').mtimeMs);
if (!fs.existsSync(builtIndex) || fs.statSync(builtIndex).mtimeMs < sources) {
  say('Building the client (vite build)…');
  const r = spawnSync('npx', ['vite', 'build', '--logLevel', 'warn'], { stdio: 'inherit', env });
  if (r.status !== 0) {
    cluster?.stop();
    process.exit(1);
  }
}

const server = spawn(process.execPath, ['--import', 'tsx', 'server/index.ts'], { stdio: ['inherit', 'inherit', 'inherit', 'ipc'], env });
server.on('message', (m) => {
  if (m && m.ready) {
    const roles = [['operator', 'Lab staff (operator)'], ['coordinator', 'Coordinator'], ['auditor', 'Auditor'], ['admin', 'Administrator']];
    const people = roles
      .map(([role, label]) => [label, (m.people ?? []).filter((p) => p.role === role)])
      .filter(([, list]) => list.length)
      .map(([label, list]) => `    ${`${label}:`.padEnd(24)}${list.map((p) => `${p.name} <${p.email}> (${p.institute})`).join(', ')}`)
      .join('\n');
    console.log(`
  Chronolevel is running: open ${m.url}
  Press "Sign in with your institute"; the local identity provider then lists the invented demo people:
${people}
  API documentation: ${m.url}/api/v1/openapi.json    Test mailbox: ${env.MAILBOX_URL ?? 'http://127.0.0.1:8181'}/messages
  Press Ctrl-C to stop everything started here.
`);
    if (env.CHRONOLEVEL_DEV_SERVICES !== '0') {
      console.log('  Demo stand-ins: the local identity provider signs in anyone who clicks a name, and the mailbox shows every');
      console.log('  message to anyone. They serve this machine only (loopback) and are not for production use.\n');
    }
  }
});
// One worker process beside the HTTP process (adjustment runs, mail, audit checkpoints), started once the server is
// up (migrations applied, local test mailbox listening); it connects with the same application-role DATABASE_URL.
let worker = null;
const startWorkerProcess = () => {
  worker = spawn(process.execPath, ['--import', 'tsx', 'server/jobs/worker.ts'], { stdio: ['inherit', 'inherit', 'inherit', 'ipc'], env });
  worker.on('message', (m) => {
    if (m && m.workerReady) say(`worker process running (pid ${worker.pid})`);
  });
  worker.on('exit', (code, signal) => {
    worker = null;
    if (!stopping) {
      say(`the worker process stopped unexpectedly (${signal ?? `exit code ${code}`}); stopping the server as well`);
      exitCode = 1;
      stop('worker stopped');
    }
    finish();
  });
};
server.on('message', (m) => {
  if (m && m.ready && !worker && !stopping) startWorkerProcess();
});

let stopping = false;
let exitCode = 0;
let serverRunning = true;
const stop = (signal) => {
  if (stopping) return;
  stopping = true;
  say(`stopping (${signal})…`);
  if (serverRunning) server.kill('SIGTERM');
  worker?.kill('SIGTERM');
};
process.on('SIGINT', () => stop('SIGINT'));
process.on('SIGTERM', () => stop('SIGTERM'));
let finished = false;
function finish() {
  if (finished || serverRunning || worker) return;
  finished = true;
  if (cluster) {
    say('stopping PostgreSQL');
    cluster.stop();
  }
  process.exit(exitCode);
}
server.on('exit', (code, signal) => {
  serverRunning = false;
  if (!stopping) {
    say(`the server process stopped unexpectedly (${signal ?? `exit code ${code}`}); stopping the worker as well`);
    exitCode = code || 1;
    stop('server stopped');
  } else if (code) exitCode = code;
  finish();
});
