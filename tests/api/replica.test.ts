import { spawnSync } from 'node:child_process';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import pg from 'pg';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, inject, it } from 'vitest';
// @ts-expect-error plain ESM helper shared with `npm start`
import { APP_ROLE, OWNER_ROLE, ROLES_SQL, freePort, startCluster, startStandby, urlAsRole } from '../../scripts/lib/postgres.mjs';
import { checkReplicasNow, onDatabase } from '../../server/db/replicas';
import { apiRoutes } from '../../server/routes';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';

// A primary and a hot standby on loopback (Debian's PostgreSQL): the standby is made with `pg_basebackup -R` and
// follows by streaming replication. The app under test has DATABASE_REPLICA_URLS set: list and detail reads come
// from the standby, the caller who just wrote reads from the primary until the standby has replayed the write, and
// a standby that lags beyond the threshold or is stopped leaves reads on the primary while /api/health says so.

const DB = 'chronolevel';
let tmp: string;
let primary: { url: string; port: number; stop: () => void };
let standby: { url: string; port: number; stop: () => void; start: () => void };
let su: pg.Pool; // superuser on the primary's database
let suStandby: pg.Pool; // superuser on the standby's copy
/** lag threshold 30 s: a paused standby still takes reads (stale reads and read-your-writes can be seen) */
let a: TestApp;
/** lag threshold 1 s: a paused standby is soon left out */
let b: TestApp;
const tok = { writer: '', colleague: '', coordinator: '', admin: '' };
let campaignId = '';

const dbUrl = (server: string, role?: string) => {
  const u = server.replace(/\/[^/]*$/, `/${DB}`);
  return role ? (urlAsRole(u, role) as string) : u;
};
const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));

async function until<T>(what: string, probe: () => Promise<T | undefined | false>, ms = 20_000): Promise<T> {
  const deadline = Date.now() + ms;
  for (;;) {
    const v = await probe();
    if (v) return v;
    if (Date.now() > deadline) throw new Error(`gave up waiting for ${what}`);
    await sleep(100);
  }
}

async function health(t: TestApp) {
  await checkReplicasNow(t.ds);
  return request(t.app).get('/api/health');
}

const get = (t: TestApp, url: string, token: string) => request(t.app).get(url).set('authorization', `Bearer ${token}`);

beforeAll(async () => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), 'chronolevel-replica-'));
  // The invented demo database, copied from a clone of the test template into a primary of our own.
  const source = await createTestApp();
  const dump = path.join(tmp, 'demo.dump');
  const sourceSu = inject('pgAdminUrl').replace(/\/[^/]*$/, `/${new URL(source.databaseUrl).pathname.slice(1)}`);
  const d = spawnSync('pg_dump', ['-Fc', '-f', dump, '-d', sourceSu], { encoding: 'utf8' });
  await source.close();
  if (d.status !== 0) throw new Error(`pg_dump failed: ${d.stderr}`);
  fs.chmodSync(tmp, 0o755);
  fs.chmodSync(dump, 0o644);

  process.env.PG_FSYNC = 'off';
  primary = await startCluster({ dataDir: path.join(tmp, 'primary'), port: await freePort(), database: 'postgres', log: () => {} });
  const admin = new pg.Client({ connectionString: primary.url });
  await admin.connect();
  await admin.query(ROLES_SQL);
  await admin.query(`CREATE DATABASE ${DB} OWNER ${OWNER_ROLE}`);
  await admin.end();
  const r = spawnSync('pg_restore', ['--exit-on-error', '-d', dbUrl(primary.url), dump], { encoding: 'utf8' });
  if (r.status !== 0) throw new Error(`pg_restore failed: ${r.stderr}`);
  su = new pg.Pool({ connectionString: dbUrl(primary.url), max: 2 });
  await su.query(`CREATE SEQUENCE replica_probe_seq; GRANT USAGE, SELECT, UPDATE ON replica_probe_seq TO ${APP_ROLE};
                  CREATE TABLE replica_probe (n int); GRANT SELECT, INSERT ON replica_probe TO ${APP_ROLE}`);

  standby = await startStandby({ primaryPort: primary.port, dataDir: path.join(tmp, 'standby'), port: await freePort(), log: () => {} });
  suStandby = new pg.Pool({ connectionString: dbUrl(standby.url), max: 2 });
  suStandby.on('error', () => undefined);
  const env = (maxLag: string) => ({ DATABASE_REPLICA_URLS: dbUrl(standby.url, APP_ROLE), REPLICA_MAX_LAG_SECONDS: maxLag, REPLICA_CHECK_INTERVAL_MS: '100' });
  a = await createTestApp({ databaseUrl: dbUrl(primary.url, APP_ROLE), env: env('30') });
  b = await createTestApp({ databaseUrl: dbUrl(primary.url, APP_ROLE), env: env('1') });
  tok.writer = await tokenFor(a, 'ines.varga@saltmarsh-lab.invalid');
  tok.colleague = await tokenFor(a, 'tomas.reyland@saltmarsh-lab.invalid');
  tok.coordinator = await tokenFor(a, 'ansel.brandt@geopotential-office.invalid');
  tok.admin = await tokenFor(a, 'yusra.holm@geopotential-office.invalid');
  // the standby has everything so far (tokens included) before the tests start
  const [{ lsn }] = (await su.query(`SELECT pg_current_wal_lsn()::text AS lsn`)).rows;
  await until('the standby to catch up', async () => (await suStandby.query(`SELECT pg_last_wal_replay_lsn() >= $1::pg_lsn AS ok`, [lsn])).rows[0].ok);
}, 180_000);

afterAll(async () => {
  await suStandby?.query('SELECT pg_wal_replay_resume()').catch(() => undefined);
  await a?.close();
  await b?.close();
  await su?.end();
  await suStandby?.end();
  standby?.stop();
  primary?.stop();
  if (tmp) fs.rmSync(tmp, { recursive: true, force: true });
});

describe('reads from a hot standby', () => {
  it('/api/health reports the standby as ok', async () => {
    const res = await health(a);
    expect(res.status).toBe(200);
    expect(res.body).toMatchObject({ status: 'ok', database: 'ok', replica: { state: 'ok', readsFrom: 'replicas' } });
    expect(res.body.replica.replicas).toHaveLength(1);
    expect(res.body.replica.replicas[0]).toMatchObject({ name: `127.0.0.1:${standby.port}/${DB}`, state: 'ok' });
  });

  it('the campaign list is read on the standby (its session there ran the list query)', async () => {
    const res = await get(a, '/api/v1/campaigns?page=1&pageSize=5', tok.coordinator);
    expect(res.status).toBe(200);
    expect(res.body.items.length).toBeGreaterThan(0);
    const { rows } = await suStandby.query(
      // the list's statement names itself at its start (the text pg_stat_activity keeps is cut at 1 KiB)
      `SELECT count(*)::int AS n FROM pg_stat_activity WHERE datname = $1 AND usename = $2 AND application_name = 'chronolevel' AND query LIKE 'SELECT /* campaign list */%'`,
      [DB, APP_ROLE],
    );
    expect(rows[0].n).toBeGreaterThan(0);
  });

  it('read-your-writes: the writer sees a new campaign at once while the paused standby does not have it yet', async () => {
    await suStandby.query('SELECT pg_wal_replay_pause()');
    const id = async (sql: string, v: string) => ((await su.query(sql, [v])).rows[0] as { id: string }).id;
    const body = {
      name: 'Replica probe campaign', clockAId: await id(`SELECT id FROM clock WHERE name = $1`, 'SCL-Sr1'), clockBId: await id(`SELECT id FROM clock WHERE name = $1`, 'HMO-Sr2'),
      linkId: await id(`SELECT id FROM fibre_link WHERE name = $1`, 'SCL–HMO long-haul'), periodStart: '2026-11-01T00:00:00.000Z', periodEnd: '2026-11-03T00:00:00.000Z',
    };
    const created = await request(a.app).post('/api/v1/campaigns').set('authorization', `Bearer ${tok.writer}`).send(body);
    expect(created.status, created.text).toBe(201);
    campaignId = created.body.id;
    // the row is on the primary…
    expect((await su.query(`SELECT name FROM campaign WHERE id = $1`, [campaignId])).rows).toEqual([{ name: body.name }]);
    // …the writer reads it at once (served by the primary: the standby has not replayed the write)…
    const mine = await get(a, `/api/v1/campaigns/${campaignId}`, tok.writer);
    expect(mine.status, mine.text).toBe(200);
    expect(mine.body.name).toBe(body.name);
    // …on another HTTP process too (the marker is in PostgreSQL, not in the process that took the write)
    expect((await get(b, `/api/v1/campaigns/${campaignId}`, tok.writer)).status).toBe(200);
    // while a colleague of the same institute, who wrote nothing, reads the standby, which does not have it yet.
    expect((await get(a, `/api/v1/campaigns/${campaignId}`, tok.colleague)).status).toBe(404);
    expect((await health(a)).body.replica.state).toBe('ok'); // paused, but within a's 30 s threshold

    await suStandby.query('SELECT pg_wal_replay_resume()');
    await until('the colleague to see the campaign', async () => (await get(a, `/api/v1/campaigns/${campaignId}`, tok.colleague)).status === 200);
  });

  it('once the standby has replayed the write, the writer reads from the standby again (the pin ends by position, not only by time)', async () => {
    const [{ lsn }] = (await su.query(`SELECT pg_current_wal_lsn()::text AS lsn`)).rows;
    await until('the standby to replay past the write', async () => (await suStandby.query(`SELECT pg_last_wal_replay_lsn() >= $1::pg_lsn AS ok`, [lsn])).rows[0].ok);
    await checkReplicasNow(a.ds);
    await suStandby.query('SELECT pg_wal_replay_pause()');
    // changed on the primary behind the app's back (no read-your-writes marker): the standby keeps the old name
    await su.query(`UPDATE campaign SET name = 'Replica probe campaign (renamed)' WHERE id = $1`, [campaignId]);
    const res = await get(a, `/api/v1/campaigns/${campaignId}`, tok.writer);
    expect(res.status).toBe(200);
    expect(res.body.name).toBe('Replica probe campaign');
  });

  it('a standby that lags beyond the threshold takes no reads: they come from the primary and /api/health says lagging (still 200)', async () => {
    // replay is still paused and the primary has moved on
    const lagging = await until('b to see the standby lagging', async () => {
      const h = await health(b);
      return h.body.replica?.state === 'lagging' && h;
    });
    expect(lagging.status).toBe(200);
    expect(lagging.body).toMatchObject({ status: 'ok', replica: { state: 'lagging', readsFrom: 'primary' } });
    expect(lagging.body.replica.lagSeconds).toBeGreaterThanOrEqual(1);
    expect(lagging.body.replica.replicas[0].reason).toMatch(/behind the primary/);
    const fresh = await get(b, `/api/v1/campaigns/${campaignId}`, tok.colleague);
    expect(fresh.body.name).toBe('Replica probe campaign (renamed)');
    // a (threshold 30 s) still reads the paused standby
    expect((await get(a, `/api/v1/campaigns/${campaignId}`, tok.colleague)).body.name).toBe('Replica probe campaign');

    await suStandby.query('SELECT pg_wal_replay_resume()');
    const ok = await until('b to see the standby caught up', async () => (await health(b)).body.replica?.state === 'ok');
    expect(ok).toBe(true);
  });

  it('a read route never sends a write to the standby; a write the standby refuses names the cause', async () => {
    // plain statements that are not SELECTs go to the primary even inside a read scope
    await onDatabase(a.ds, 'read', null, () => a.ds.query('INSERT INTO replica_probe (n) VALUES (1)'));
    expect((await su.query('SELECT count(*)::int AS n FROM replica_probe')).rows[0].n).toBe(1);
    // a select query builder with a writing function is sent to the standby, which refuses it: the error says why
    const attempt = onDatabase(a.ds, 'read', null, () =>
      a.ds.createQueryBuilder().select(`nextval('replica_probe_seq')`, 'n').from('campaign', 'c').limit(1).getRawMany());
    await expect(attempt).rejects.toThrow(/read replica refused a write.*db: 'write'/s);
  });

  it('every GET route answers without a server error while its reads go to the standby', async () => {
    const failures: string[] = [];
    const concrete = (p: string) => p.replace(/:[A-Za-z]+/g, '00000000-0000-4000-8000-000000000000');
    for (const r of apiRoutes.filter((x) => x.method === 'get')) {
      const res = await get(a, concrete(r.path), tok.admin);
      if (res.status >= 500) failures.push(`${r.path}: ${res.status} ${res.text.slice(0, 200)}`);
    }
    expect(failures).toEqual([]);
  });

  it('a stopped standby: reads go on from the primary and /api/health says down (still 200); a restarted one is used again', async () => {
    standby.stop();
    const list = await get(a, '/api/v1/campaigns?page=1&pageSize=5', tok.coordinator);
    expect(list.status, list.text).toBe(200);
    expect(list.body.items.length).toBeGreaterThan(0);
    const down = await until('the standby to be reported down', async () => {
      const h = await health(a);
      return h.body.replica?.state === 'down' && h;
    });
    expect(down.status).toBe(200);
    expect(down.body).toMatchObject({ status: 'ok', database: 'ok', replica: { state: 'down', readsFrom: 'primary', lagSeconds: null } });
    const detail = await get(a, `/api/v1/campaigns/${campaignId}`, tok.colleague);
    expect(detail.status).toBe(200);
    expect(detail.body.name).toBe('Replica probe campaign (renamed)');

    standby.start();
    expect(await until('the standby to be ok again', async () => (await health(a)).body.replica?.state === 'ok')).toBe(true);
    expect((await get(a, '/api/v1/campaigns?page=1&pageSize=5', tok.coordinator)).status).toBe(200);
  });
});
