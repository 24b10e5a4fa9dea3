import { spawn, type ChildProcess } from 'node:child_process';
import crypto from 'node:crypto';
import fs from 'node:fs';
import http from 'node:http';
import net from 'node:net';
import type { AddressInfo } from 'node:net';
import type pg from 'pg';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { openDatabase } from '../../server/db/data-source';
import { resumeFileFor } from '../../server/dev/fault-point';
import { runHousekeeping } from '../../server/maintenance/housekeeping';
import { lockRawFile, sweepRawFileOrphans } from '../../server/uploads/raw-file-stream';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';
import { insertUploadCampaign } from '../helpers/uploads-campaign';

// The raw file of an upload is written on a second connection, alongside the samples' COPY, and committed just
// before the upload's own transaction. Whatever happens to the upload, nothing of it may become visible unless it is
// complete: a late rejection or a client that goes away leaves no part at all; parts left without their series (a
// kill between the two commits) are swept, but never while their upload still holds its lock.
let t: TestApp;
let token: string;
let server: http.Server;
let port: number;
const children = new Set<ChildProcess>();

const poolOf = (ds: TestApp['ds']) => (ds.driver as unknown as { master: pg.Pool }).master;
const checkedOut = () => poolOf(t.ds).totalCount - poolOf(t.ds).idleCount;
const mapping = { epochColumn: '1', epochKind: 'mjd', valueColumn: '2', valueKind: 'offset' };

/** `n` rows at 1 s spacing from MJD 61100 (inside the test campaign's period), about 40 bytes each. */
function rows(from: number, n: number) {
  let s = '';
  for (let i = from; i < from + n; i++) s += `${(61100 + i / 86400).toFixed(9)},${(1e-16 * Math.sin(i)).toExponential(9)}\n`;
  return s;
}
/** Every part in the table, visible (with its series) or not. */
const allParts = async () => (await t.ds.query('SELECT count(*)::int AS n FROM ratio_series_file'))[0].n as number;
const partsOf = async (seriesId: string) => (await t.ds.query('SELECT count(*)::int AS n FROM ratio_series_file WHERE series_id = $1', [seriesId]))[0].n as number;
const seriesOf = async (campaignId: string) => (await t.ds.query('SELECT count(*)::int AS n FROM ratio_series WHERE campaign_id = $1', [campaignId]))[0].n as number;
const copies = async () => (await t.ds.query(
  "SELECT query FROM pg_stat_activity WHERE datname = current_database() AND state = 'active' AND query LIKE 'COPY ratio_s%' ORDER BY query",
)).map((r: { query: string }) => r.query.split(' ')[1]) as string[];

async function waitFor(cond: () => Promise<boolean>, ms: number) {
  const end = Date.now() + ms;
  while (Date.now() < end) {
    if (await cond()) return true;
    await new Promise((r) => setTimeout(r, 50));
  }
  return cond();
}

/** Inserts raw-file parts for a series id with no series row, committed (what a kill between the two commits leaves). */
async function orphanParts(seriesId: string, n: number) {
  for (let p = 0; p < n; p++) await t.ds.query('INSERT INTO ratio_series_file (series_id, part, bytes) VALUES ($1, $2, $3)', [seriesId, p, Buffer.from(`part ${p}\n`)]);
}

function multipartHead(boundary: string, fileName: string) {
  return Object.entries(mapping).map(([k, v]) => `--${boundary}\r\nContent-Disposition: form-data; name="${k}"\r\n\r\n${v}\r\n`).join('')
    + `--${boundary}\r\nContent-Disposition: form-data; name="file"; filename="${fileName}"\r\nContent-Type: text/csv\r\n\r\n`;
}

beforeAll(async () => {
  t = await createTestApp();
  token = await tokenFor(t, 'ines.varga@saltmarsh-lab.invalid');
  server = t.app.listen(0, '127.0.0.1');
  await new Promise((r) => server.once('listening', r));
  port = (server.address() as AddressInfo).port;
});
afterAll(async () => {
  for (const c of children) c.kill('SIGKILL');
  await new Promise((r) => server.close(r));
  await t.close();
});

describe('raw file beside the samples', () => {
  it('a complete upload of several parts reads back byte for byte, with the SHA-256 the upload answered', async () => {
    const campaignId = await insertUploadCampaign(t.ds);
    const csv = Buffer.from(rows(0, 90_000)); // ≈ 2.9 MB: three parts of ≤ 1 MiB
    const req = request(t.app).post(`/api/v1/campaigns/${campaignId}/uploads`).set('authorization', `Bearer ${token}`);
    for (const [k, v] of Object.entries(mapping)) req.field(k, v);
    const res = await req.attach('file', csv, 'four-parts.csv');
    expect(res.status).toBe(201);
    const sha = crypto.createHash('sha256').update(csv).digest('hex');
    expect(res.body).toMatchObject({ sha256: sha, byteSize: csv.length, rowCount: 90_000 });
    const parts: { part: number; bytes: Buffer }[] = await t.ds.query('SELECT part, bytes FROM ratio_series_file WHERE series_id = $1 ORDER BY part', [res.body.id]);
    expect(parts.map((p) => p.part)).toEqual([0, 1, 2]);
    expect(parts.map((p) => p.bytes.length)).toEqual([1 << 20, 1 << 20, csv.length - 2 * (1 << 20)]);
    const back = Buffer.concat(parts.map((p) => p.bytes));
    expect(back.equals(csv)).toBe(true);
    expect(crypto.createHash('sha256').update(back).digest('hex')).toBe(sha);
    // the export re-reads the raw file through its series: every line comes back
    const exp = await request(t.app).get(`/api/v1/uploads/${res.body.id}/samples.csv`).set('authorization', `Bearer ${token}`);
    expect(exp.status).toBe(200);
    expect(exp.text).not.toContain('INCOMPLETE');
    expect(exp.text.trimEnd().split('\n')).toHaveLength(2 + 90_000);
    // deleting the series removes its parts (trigger; there is no foreign key any more)
    await t.ds.query('DELETE FROM ratio_series WHERE id = $1', [res.body.id]);
    expect(await partsOf(res.body.id)).toBe(0);
  });

  it('a file rejected at its last line leaves no part, not even an invisible one', async () => {
    const campaignId = await insertUploadCampaign(t.ds);
    const before = await allParts();
    const csv = `${rows(0, 90_000)}61101.5,not-a-number\n`;
    const req = request(t.app).post(`/api/v1/campaigns/${campaignId}/uploads`).set('authorization', `Bearer ${token}`);
    for (const [k, v] of Object.entries(mapping)) req.field(k, v);
    const res = await req.attach('file', Buffer.from(csv), 'bad-end.csv');
    expect(res.status).toBe(400);
    expect(res.body.issues[0]).toMatchObject({ path: 'file', line: 90_001, column: '2' });
    expect(await seriesOf(campaignId)).toBe(0);
    expect(await allParts()).toBe(before);
  });

  it('both COPYs run at once; a client that goes away mid-file leaves no part and both connections come back', async () => {
    const campaignId = await insertUploadCampaign(t.ds);
    const before = await allParts();
    const baseline = checkedOut();
    const boundary = `----raw${crypto.randomBytes(6).toString('hex')}`;
    const socket = net.connect(port, '127.0.0.1');
    await new Promise((r) => socket.once('connect', r));
    socket.on('error', () => undefined);
    socket.write(`POST /api/v1/campaigns/${campaignId}/uploads HTTP/1.1\r\nHost: 127.0.0.1:${port}\r\nAuthorization: Bearer ${token}\r\n`
      + `Content-Type: multipart/form-data; boundary=${boundary}\r\nContent-Length: ${50 * 1024 * 1024}\r\n\r\n${multipartHead(boundary, 'aborted.csv')}`);
    socket.write(rows(0, 60_000)); // ≈ 1.9 MB: one whole part sent to the raw file's COPY, the rest still to come
    // the samples' and the raw file's COPY are open at the same moment, on two connections
    expect(await waitFor(async () => (await copies()).length === 2, 10_000)).toBe(true);
    expect(await copies()).toEqual(['ratio_sample', 'ratio_series_file']);
    socket.destroy();
    expect(await waitFor(async () => checkedOut() <= baseline && (await copies()).length === 0, 5000)).toBe(true);
    const idle = await t.ds.query("SELECT count(*)::int AS n FROM pg_stat_activity WHERE datname = current_database() AND state LIKE 'idle in transaction%'");
    expect(idle[0].n).toBe(0);
    expect(await seriesOf(campaignId)).toBe(0);
    expect(await allParts()).toBe(before);
  });

  it('with no second connection to be had, the raw file is stored on the upload\'s own connection after the samples', async () => {
    const t2 = await createTestApp({ seed: false });
    const held: pg.PoolClient[] = [];
    try {
      const c2 = await insertUploadCampaign(t2.ds);
      const tok2 = await tokenFor(t2, 'ines.varga@saltmarsh-lab.invalid');
      const pool = poolOf(t2.ds);
      // every connection but one busy: the upload gets that one only
      for (let i = 1; i < ((pool.options as { max?: number }).max ?? 10); i++) held.push(await pool.connect());
      const csv = Buffer.from(rows(0, 40_000));
      const req = request(t2.app).post(`/api/v1/campaigns/${c2}/uploads`).set('authorization', `Bearer ${tok2}`);
      for (const [k, v] of Object.entries(mapping)) req.field(k, v);
      const res = await req.attach('file', csv, 'one-connection.csv');
      expect(res.status).toBe(201);
      const [{ raw }] = await t2.ds.query("SELECT string_agg(bytes, '' ORDER BY part) AS raw FROM ratio_series_file WHERE series_id = $1", [res.body.id]);
      expect(Buffer.from(raw).equals(csv)).toBe(true);
    } finally {
      for (const c of held) c.release();
      await t2.close();
    }
  });
});

describe('sweep of parts without a series', () => {
  it('removes parts whose series does not exist and whose lock is free; keeps those of a live upload and of stored series', async () => {
    const campaignId = await insertUploadCampaign(t.ds);
    const req = request(t.app).post(`/api/v1/campaigns/${campaignId}/uploads`).set('authorization', `Bearer ${token}`);
    for (const [k, v] of Object.entries(mapping)) req.field(k, v);
    const stored = await req.attach('file', Buffer.from(rows(0, 10)), 'kept.csv');
    expect(stored.status).toBe(201);

    const abandoned = crypto.randomUUID();
    const inProgress = crypto.randomUUID();
    await orphanParts(abandoned, 3);
    await orphanParts(inProgress, 2);
    // an upload still on its way to commit: its transaction holds the lock the upload takes
    const live = await poolOf(t.ds).connect();
    try {
      await live.query('BEGIN');
      await lockRawFile(live, inProgress);
      expect(await sweepRawFileOrphans(t.ds)).toBe(3);
      expect(await partsOf(abandoned)).toBe(0);
      expect(await partsOf(inProgress)).toBe(2);
      expect(await partsOf(stored.body.id)).toBe(1);
      await live.query('ROLLBACK'); // that upload failed: its lock is free
    } finally {
      live.release();
    }
    expect((await runHousekeeping(t.ds)).rawFileOrphans).toBe(2);
    expect(await partsOf(inProgress)).toBe(0);
    expect(await partsOf(stored.body.id)).toBe(1);
    expect(await sweepRawFileOrphans(t.ds)).toBe(0);
  });

  it('a server killed between the raw file\'s commit and its own leaves only parts without a series, swept once the lock is gone', async () => {
    const campaignId = await insertUploadCampaign(t.ds);
    const appName = `raw-kill-${crypto.randomBytes(4).toString('hex')}`;
    const env = {
      DATABASE_URL: `${t.databaseUrl}?application_name=${appName}`, SESSION_SECRET: 'raw-kill-session-secret-0123456789',
      IDP_CERT_FILE: t.config.idpCertFile, SECRETS_DIR: t.config.secretsDir, LOG_LEVEL: 'silent', NODE_ENV: 'test', CHRONOLEVEL_FAULT_POINT: 'raw-file-committed',
    };
    const child = spawn(process.execPath, ['--import', 'tsx', 'tests/helpers/upload-server.ts'], {
      env: { ...process.env, ...env, CHRONOLEVEL_CHILD_ENV: JSON.stringify(env) }, stdio: ['ignore', 'pipe', 'inherit'],
    });
    children.add(child);
    let paused = false;
    const childPort: number = await new Promise((resolve) => child.stdout!.on('data', (d: Buffer) => {
      const text = d.toString();
      if (text.includes('FAULT raw-file-committed')) paused = true;
      const m = /LISTENING (\d+)/.exec(text);
      if (m) resolve(Number(m[1]));
    }));
    const before = await allParts();
    const csv = rows(0, 60_000);
    const boundary = `----rawkill${crypto.randomBytes(6).toString('hex')}`;
    const req = http.request({
      host: '127.0.0.1', port: childPort, method: 'POST', path: `/api/v1/campaigns/${campaignId}/uploads`,
      headers: { authorization: `Bearer ${token}`, 'content-type': `multipart/form-data; boundary=${boundary}`, 'transfer-encoding': 'chunked' },
    });
    req.on('error', () => undefined); // the server goes away mid-request
    req.end(`${multipartHead(boundary, 'killed.csv')}${csv}\r\n--${boundary}--\r\n`);
    expect(await waitFor(async () => paused, 30_000)).toBe(true);

    // paused between the commits: the parts are committed, their series is not, and the live upload keeps them
    const orphans = await t.ds.query('SELECT DISTINCT series_id FROM ratio_series_file f WHERE NOT EXISTS (SELECT 1 FROM ratio_series s WHERE s.id = f.series_id)');
    expect(orphans).toHaveLength(1);
    const seriesId = orphans[0].series_id as string;
    const parts = Math.ceil(Buffer.byteLength(csv) / (1 << 20));
    expect(await partsOf(seriesId)).toBe(parts);
    expect(await seriesOf(campaignId)).toBe(0);
    expect(await sweepRawFileOrphans(t.ds)).toBe(0);
    expect(await partsOf(seriesId)).toBe(parts);

    child.kill('SIGKILL');
    await new Promise((r) => child.once('exit', r));
    children.delete(child);
    fs.rmSync(resumeFileFor(child.pid!), { force: true });
    // PostgreSQL notices the dropped connections, rolls the upload back and frees its lock
    expect(await waitFor(async () => (await t.ds.query('SELECT count(*)::int AS n FROM pg_stat_activity WHERE application_name = $1', [appName]))[0].n === 0, 10_000)).toBe(true);
    expect(await seriesOf(campaignId)).toBe(0);
    expect(await sweepRawFileOrphans(t.ds)).toBe(parts);
    expect(await allParts()).toBe(before);
  });
});

describe('migration RawFileApart', () => {
  it('down() removes parts without a series and restores the foreign key; up() drops it again', async () => {
    const t2 = await createTestApp({ seed: false });
    const owner = await openDatabase(t2.ownerUrl, { migrate: false });
    const fk = async () => (await owner.query("SELECT count(*)::int AS n FROM pg_constraint WHERE conname = 'ratio_series_file_series_id_fkey'"))[0].n as number;
    try {
      expect(await fk()).toBe(0);
      const orphan = crypto.randomUUID();
      const parts = async () => (await owner.query('SELECT count(*)::int AS n FROM ratio_series_file')).map((r: { n: number }) => r.n)[0] as number;
      const kept = await parts(); // the parts of stored series (the template's demo uploads)
      await owner.query('INSERT INTO ratio_series_file (series_id, part, bytes) VALUES ($1, 0, $2)', [orphan, Buffer.from('orphan')]);
      await owner.undoLastMigration({ transaction: 'each' });
      expect(await fk()).toBe(1);
      expect(await parts()).toBe(kept);
      expect((await owner.query('SELECT count(*)::int AS n FROM ratio_series_file WHERE series_id = $1', [orphan]))[0].n).toBe(0);
      await owner.runMigrations({ transaction: 'each' });
      expect(await fk()).toBe(0);
      expect((await owner.query("SELECT count(*)::int AS n FROM pg_trigger WHERE tgname = 'ratio_series_file_gone'"))[0].n).toBe(1);
    } finally {
      await owner.destroy();
      await t2.close();
    }
  });
});
