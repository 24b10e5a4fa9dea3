import type { AddressInfo } from 'node:net';
import type http from 'node:http';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { MAX_STABILITY_SAMPLES } from '../../shared/calc';
import { stabilityInWorker } from '../../server/calc/stability-pool';
import { ScienceInputError } from '../../server/science/errors';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';

// The stability calculator is bounded (MAX_STABILITY_SAMPLES per series, 200 averaging times) and computes in a worker
// thread, so the event loop keeps answering other requests while it works.
let t: TestApp;
let server: http.Server;
let base: string;
let token: string;
beforeAll(async () => {
  t = await createTestApp({ seed: false });
  token = await tokenFor(t, 'petra.lind@audit-bureau.invalid');
  server = t.app.listen(0, '127.0.0.1');
  await new Promise((r) => server.once('listening', r));
  base = `http://127.0.0.1:${(server.address() as AddressInfo).port}`;
});
afterAll(async () => {
  await new Promise((r) => server.close(r));
  await t.close();
});

const series = (n: number) => Array.from({ length: n }, (_, i) => Math.sin(i * 0.7) * 1.234567890123e-15 + ((i * 7919) % 101) * 1e-18);
const post = (body: unknown) => request(t.app).post('/api/v1/calc/stability').set('authorization', `Bearer ${token}`).send(body as object);

describe('stability calculator limits', () => {
  it(`accepts ${MAX_STABILITY_SAMPLES} samples and refuses one more, naming the field`, async () => {
    expect(MAX_STABILITY_SAMPLES).toBe(200_000);
    const ok = await post({ tau0Seconds: 1, fractionalFrequency: series(MAX_STABILITY_SAMPLES), tauSeconds: [1, 1000] });
    expect(ok.status).toBe(200);
    expect(ok.body.points[0].n).toBe(MAX_STABILITY_SAMPLES - 1);
    const tooMany = await post({ tau0Seconds: 1, fractionalFrequency: series(MAX_STABILITY_SAMPLES + 1) });
    expect(tooMany.status).toBe(400);
    expect(tooMany.body.issues[0].path).toBe('body.fractionalFrequency');
    expect(tooMany.body.issues[0].message).toMatch(/200000/);
  }, 60_000);

  it('a body beyond the calculator body limit is refused with 413', async () => {
    const res = await request(t.app).post('/api/v1/calc/stability').set('authorization', `Bearer ${token}`).set('content-type', 'application/json')
      .send(`{"tau0Seconds":1,"fractionalFrequency":[${'1.2345678901234567e-15,'.repeat(500_000)}1]}`);
    expect(res.status).toBe(413);
  });

  it('errors of the science module, thrown in the worker, still name the request field', async () => {
    const thrown = await stabilityInWorker({ y: new Float64Array(8), x: new Float64Array(8), tau0Seconds: 1 }).catch((e: unknown) => e);
    expect(thrown).toBeInstanceOf(ScienceInputError);
    expect(thrown).toMatchObject({ field: 'x', message: 'x: give either y or x, not both' });
    const bad = await post({ tau0Seconds: 1, fractionalFrequency: [1e-15, 2e-15, 3e-15], tauSeconds: [2.5] });
    expect(bad.status).toBe(400);
    expect(bad.body.issues[0].path).toBe('body.tauSeconds.0');
  });

  it('while a heavy analysis runs, the event loop keeps answering /api/health', async () => {
    const ms = Array.from({ length: 200 }, (_, i) => 1 + i * 300);
    const body = JSON.stringify({ tau0Seconds: 1, fractionalFrequency: series(MAX_STABILITY_SAMPLES), tauSeconds: ms });
    let done = false;
    let healthWhileRunning = 0;
    const heavy = fetch(`${base}/api/v1/calc/stability`, { method: 'POST', body, headers: { 'content-type': 'application/json', authorization: `Bearer ${token}` } })
      .then(async (r) => {
        done = true;
        return { status: r.status, body: (await r.json()) as { points: unknown[] } };
      });
    const answered: number[] = [];
    for (let i = 0; i < 2000 && !done; i++) {
      const h = await fetch(`${base}/api/health`);
      await h.arrayBuffer();
      if (!done) {
        healthWhileRunning++;
        answered.push(h.status);
      }
    }
    const r = await heavy;
    expect(r.status).toBe(200);
    expect(r.body.points.length).toBeGreaterThan(100);
    // many health checks were answered before the analysis finished: measured 127 with the worker thread, 9 (all
    // during the body upload) when the analysis ran on the event loop
    expect(healthWhileRunning).toBeGreaterThanOrEqual(40);
    expect(answered.every((s) => s === 200)).toBe(true);
  }, 60_000);
});
