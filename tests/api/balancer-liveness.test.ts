import type http from 'node:http';
import type { AddressInfo } from 'node:net';
import type pg from 'pg';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
// @ts-expect-error plain ESM helper shared with `npm start`
import { freePort } from '../../scripts/lib/postgres.mjs';
import { startHaproxy } from '../helpers/haproxy';
import { createTestApp, type TestApp } from '../helpers/test-app';

// A busy process must stay in the balancer's rotation. /api/health honestly answers 503 "degraded" while every
// database connection of the process is checked out; a balancer whose health check is /api/health then takes every
// such process out and answers 503 itself to all clients (the non-2xx answers seen in the load benchmark).
// The balancer checks /api/live instead, which answers without the database. Two listeners on one app stand for
// two HTTP processes; the pool is saturated by holding every connection.
let t: TestApp;
const servers: http.Server[] = [];
const ports: number[] = [];
const balancers: Awaited<ReturnType<typeof startHaproxy>>[] = [];

const poolOf = (ds: TestApp['ds']) => (ds.driver as unknown as { master: pg.Pool }).master;

beforeAll(async () => {
  t = await createTestApp();
  for (let i = 0; i < 2; i++) {
    const s = t.app.listen(0, '127.0.0.1');
    await new Promise((r) => s.once('listening', r));
    servers.push(s);
    ports.push((s.address() as AddressInfo).port);
  }
});
afterAll(async () => {
  for (const lb of balancers) await lb.stop();
  for (const s of servers) await new Promise((r) => s.close(r));
  await t.close();
});

async function balancer(checkPath?: string) {
  const lb = await startHaproxy({ port: await freePort(), backends: ports, statsPort: await freePort(), ...(checkPath ? { checkPath } : {}) });
  balancers.push(lb);
  return lb;
}

/** Polls `cond` every 100 ms for at most `ms`; the last value of `cond`. */
async function waitFor(cond: () => Promise<boolean>, ms: number): Promise<boolean> {
  const end = Date.now() + ms;
  while (Date.now() < end) {
    if (await cond()) return true;
    await new Promise((r) => setTimeout(r, 100));
  }
  return cond();
}

describe('load balancer health check', () => {
  it('/api/live answers 200 without the database; /api/health keeps reporting a saturated pool as 503 degraded', async () => {
    const pool = poolOf(t.ds);
    const max = (pool.options as { max?: number }).max ?? 10;
    const held: pg.PoolClient[] = [];
    try {
      for (let i = 0; i < max; i++) held.push(await pool.connect());
      const live = await request(t.app).get('/api/live');
      expect(live.status).toBe(200);
      expect(live.body).toMatchObject({ status: 'alive' });
      const health = await request(t.app).get('/api/health');
      expect(health.status).toBe(503);
      expect(health.body).toMatchObject({ status: 'degraded', pool: { max, inUse: max } });
    } finally {
      for (const c of held) c.release();
    }
  });

  it('with the pool saturated, a balancer checking /api/health drops both processes and answers 503 itself; checking /api/live keeps both', async () => {
    const onHealth = await balancer('/api/health');
    const onLive = await balancer();
    const up = async (lb: typeof onHealth) => (await lb.stats()).servers.every((s) => s.status === 'UP');
    expect(await waitFor(async () => (await up(onHealth)) && (await up(onLive)), 5000)).toBe(true);

    const pool = poolOf(t.ds);
    const max = (pool.options as { max?: number }).max ?? 10;
    const held: pg.PoolClient[] = [];
    try {
      for (let i = 0; i < max; i++) held.push(await pool.connect());
      // haproxy marks a server down after 3 failed checks, 500 ms apart
      const allDown = await waitFor(async () => (await onHealth.stats()).servers.every((s) => s.status === 'DOWN'), 8000);
      expect(allDown).toBe(true);
      const refused = await fetch(`${onHealth.url}/api/live`);
      expect(refused.status).toBe(503);
      expect(await refused.text()).toMatch(/No server is available/i);
      // haproxy counts an answer in its statistics when the stream ends, which may be just after the client has it
      expect(await waitFor(async () => (await onHealth.stats()).noServerAvailable >= 1, 2000)).toBe(true);

      // the same saturation, the same time: the liveness-checked balancer kept both processes and forwards to them
      const live = await onLive.stats();
      expect(live.servers.map((s) => [s.status, s.checksDown])).toEqual([['UP', 0], ['UP', 0]]);
      const answered = await fetch(`${onLive.url}/api/live`);
      expect(answered.status).toBe(200);
      expect(await answered.json()).toMatchObject({ status: 'alive' });
      // readiness through the balancer is still honest
      const health = await fetch(`${onLive.url}/api/health`);
      expect(health.status).toBe(503);
      expect(await health.json()).toMatchObject({ status: 'degraded' });
    } finally {
      for (const c of held) c.release();
    }
    expect((await onLive.stats()).noServerAvailable).toBe(0);
  });
});
