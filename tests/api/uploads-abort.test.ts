import crypto from 'node:crypto';
import type { AddressInfo } from 'node:net';
import net from 'node:net';
import type http from 'node:http';
import type pg from 'pg';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';
import { insertUploadCampaign } from '../helpers/uploads-campaign';

// Clients that go away mid-upload (real sockets: request head, multipart head, two rows, then the socket is destroyed).
// Every such upload must end its COPY, roll back and give its connection back: the pool returns to its baseline, no
// session stays idle in transaction, nothing is stored, and /api/health reports a saturated pool as degraded.
let t: TestApp;
let server: http.Server;
let port: number;
let token: string;
let campaignId: string;

const poolOf = (ds: TestApp['ds']) => (ds.driver as unknown as { master: pg.Pool }).master;
const checkedOut = () => {
  const p = poolOf(t.ds);
  return p.totalCount - p.idleCount;
};

beforeAll(async () => {
  t = await createTestApp();
  token = await tokenFor(t, 'ines.varga@saltmarsh-lab.invalid');
  campaignId = await insertUploadCampaign(t.ds);
  server = t.app.listen(0, '127.0.0.1');
  await new Promise((r) => server.once('listening', r));
  port = (server.address() as AddressInfo).port;
});
afterAll(async () => {
  await new Promise((r) => server.close(r));
  await t.close();
});

/** Sends the request head, the mapping fields, the file part's head and two rows, then destroys the socket (or, with `stall`, keeps it open and silent). */
function abortedUpload(opts: { port?: number; token?: string; campaignId?: string; stall?: boolean } = {}): Promise<net.Socket> {
  const target = { port: opts.port ?? port, token: opts.token ?? token, campaignId: opts.campaignId ?? campaignId };
  return new Promise((resolve, reject) => {
    const boundary = `----abort${crypto.randomBytes(6).toString('hex')}`;
    const fields = { epochColumn: '1', epochKind: 'mjd', valueColumn: '2', valueKind: 'offset' };
    const body = Object.entries(fields).map(([k, v]) => `--${boundary}\r\nContent-Disposition: form-data; name="${k}"\r\n\r\n${v}\r\n`).join('')
      + `--${boundary}\r\nContent-Disposition: form-data; name="file"; filename="aborted.csv"\r\nContent-Type: text/csv\r\n\r\n`
      + '61100.000000000,1.5e-17\n61100.000011574,1.6e-17\n';
    const socket = net.connect(target.port, '127.0.0.1', () => {
      socket.write(
        `POST /api/v1/campaigns/${target.campaignId}/uploads HTTP/1.1\r\nHost: 127.0.0.1:${target.port}\r\nAuthorization: Bearer ${target.token}\r\n`
        + `Content-Type: multipart/form-data; boundary=${boundary}\r\nContent-Length: ${10 * 1024 * 1024}\r\n\r\n${body}`,
      );
      // give the server time to open the transaction and start the COPY before the client vanishes
      setTimeout(() => {
        if (!opts.stall) socket.destroy();
        resolve(socket);
      }, 150);
    });
    socket.on('error', (e) => (opts.stall ? undefined : reject(e)));
  });
}

async function waitFor(cond: () => Promise<boolean>, ms: number) {
  const end = Date.now() + ms;
  while (Date.now() < end) {
    if (await cond()) return true;
    await new Promise((r) => setTimeout(r, 50));
  }
  return cond();
}

describe('client aborts during an upload', () => {
  it('50 aborted uploads: the pool is back to its baseline within 5 s, nothing is stored, no session idle in transaction', async () => {
    const baseline = checkedOut();
    const [before] = await t.ds.query('SELECT (SELECT count(*)::int FROM ratio_series) AS series, (SELECT count(*)::int FROM ratio_sample) AS samples, (SELECT count(*)::int FROM ratio_series_file) AS files');
    for (let round = 0; round < 5; round++) await Promise.all(Array.from({ length: 10 }, () => abortedUpload()));

    const settled = await waitFor(async () => checkedOut() <= baseline && poolOf(t.ds).waitingCount === 0, 5000);
    expect({ settled, checkedOut: checkedOut(), waiting: poolOf(t.ds).waitingCount }).toEqual({ settled: true, checkedOut: baseline, waiting: 0 });

    const [after] = await t.ds.query('SELECT (SELECT count(*)::int FROM ratio_series) AS series, (SELECT count(*)::int FROM ratio_sample) AS samples, (SELECT count(*)::int FROM ratio_series_file) AS files');
    expect(after).toEqual(before);
    const [{ n: ofCampaign }] = await t.ds.query('SELECT count(*)::int AS n FROM ratio_series WHERE campaign_id = $1', [campaignId]);
    expect(ofCampaign).toBe(0);
    const stuck = await t.ds.query(
      `SELECT state, query FROM pg_stat_activity WHERE datname = current_database() AND pid <> pg_backend_pid()
         AND (state LIKE 'idle in transaction%' OR query LIKE 'COPY ratio_sample%' AND state = 'active')`,
    );
    expect(stuck).toEqual([]);

    // the app still answers, and a complete upload still works
    const ok = await request(t.app).post(`/api/v1/campaigns/${campaignId}/uploads`).set('authorization', `Bearer ${token}`)
      .field('epochColumn', '1').field('epochKind', 'mjd').field('valueColumn', '2').field('valueKind', 'offset')
      .attach('file', Buffer.from('61100.000000000,1.5e-17\n61100.000011574,1.6e-17\n61100.000023148,1.4e-17\n'), 'complete.csv');
    expect(ok.status).toBe(201);
    expect(ok.body.rowCount).toBe(3);
  });

  it('/api/health reports a saturated pool as degraded (503) without waiting for a connection', async () => {
    const pool = poolOf(t.ds);
    const max = (pool.options as { max?: number }).max ?? 10;
    const held: pg.PoolClient[] = [];
    try {
      for (let i = 0; i < max; i++) held.push(await pool.connect());
      const res = await request(t.app).get('/api/health');
      expect(res.status).toBe(503);
      expect(res.body).toMatchObject({ status: 'degraded', database: 'ok', pool: { max, inUse: max } });
    } finally {
      for (const c of held) c.release();
    }
    const res = await request(t.app).get('/api/health');
    expect(res.status).toBe(200);
    expect(res.body).toMatchObject({ status: 'ok', database: 'ok' });
  });

  it('a client that stalls mid-file (socket open, silent) is cut off after the idle timeout and its COPY rolled back', async () => {
    const t2 = await createTestApp({ seed: false, env: { UPLOAD_IDLE_TIMEOUT_MS: '1000' } });
    const server2 = t2.app.listen(0, '127.0.0.1');
    await new Promise((r) => server2.once('listening', r));
    try {
      const c2 = await insertUploadCampaign(t2.ds);
      const tok2 = await tokenFor(t2, 'ines.varga@saltmarsh-lab.invalid');
      const pool2 = poolOf(t2.ds);
      const baseline = pool2.totalCount - pool2.idleCount;
      const sockets = await Promise.all(Array.from({ length: 5 }, () => abortedUpload({ port: (server2.address() as AddressInfo).port, token: tok2, campaignId: c2, stall: true })));
      expect(pool2.totalCount - pool2.idleCount).toBeGreaterThan(baseline); // the stalled uploads hold their connections
      const settled = await waitFor(async () => pool2.totalCount - pool2.idleCount <= baseline, 5000);
      expect(settled).toBe(true);
      expect(sockets.every((s) => s.destroyed || s.readableEnded)).toBe(true);
      const [{ n }] = await t2.ds.query('SELECT count(*)::int AS n FROM ratio_series WHERE campaign_id = $1', [c2]);
      expect(n).toBe(0);
      for (const s of sockets) s.destroy();
    } finally {
      await new Promise((r) => server2.close(r));
      await t2.close();
    }
  });
});
