import { Writable } from 'node:stream';
import pino from 'pino';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { UserEntity } from '../../server/db/entities/core.entities';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';

// One concise line per API request (method, path, status, ms, actor), no headers, nothing for /api/health, /api/live or static files.
const lines: Record<string, unknown>[] = [];
const raw: string[] = [];
const sink = new Writable({
  write(chunk: Buffer, _enc, done) {
    for (const l of chunk.toString().split('\n').filter(Boolean)) {
      raw.push(l);
      lines.push(JSON.parse(l));
    }
    done();
  },
});
let t: TestApp;

beforeAll(async () => {
  t = await createTestApp({ logger: pino({ level: 'info' }, sink) });
});
afterAll(async () => {
  await t?.close();
});

describe('request log', () => {
  it('writes one line with method, path, status, ms and actor id, and no header or query value', async () => {
    const token = await tokenFor(t, 'ines.varga@saltmarsh-lab.invalid');
    const user = await t.ds.getRepository(UserEntity).findOneByOrFail({ email: 'ines.varga@saltmarsh-lab.invalid' });
    const cookieValue = 'chronolevel.sid=s%3Acookie-value-that-must-not-be-logged';
    const before = lines.length;
    const res = await request(t.app).get('/api/v1/me?secret=query-value-that-must-not-be-logged')
      .set('authorization', `Bearer ${token}`).set('cookie', cookieValue);
    expect(res.status).toBe(200);
    await new Promise((r) => setImmediate(r));
    const mine = lines.slice(before).filter((l) => l.msg === 'request');
    expect(mine).toHaveLength(1);
    const line = mine[0];
    expect(line).toMatchObject({ method: 'GET', path: '/api/v1/me', status: 200, actor: user.id });
    expect(typeof line.ms).toBe('number');
    expect(line.ms as number).toBeGreaterThanOrEqual(0);
    expect(line.reqId).toBe(res.headers['x-request-id']);
    // no headers at all, and none of the secrets anywhere in the output
    expect(line).not.toHaveProperty('req');
    expect(line).not.toHaveProperty('res');
    const text = raw.slice(before).join('\n');
    expect(text).not.toContain(token);
    expect(text).not.toContain('cookie-value-that-must-not-be-logged');
    expect(text).not.toContain('query-value-that-must-not-be-logged');
    expect(text.toLowerCase()).not.toContain('authorization');
  });

  it('logs an anonymous refusal with a null actor and the error status', async () => {
    const before = lines.length;
    const res = await request(t.app).get('/api/v1/me');
    expect(res.status).toBe(401);
    await new Promise((r) => setImmediate(r));
    const mine = lines.slice(before).filter((l) => l.msg === 'request');
    expect(mine).toEqual([expect.objectContaining({ method: 'GET', path: '/api/v1/me', status: 401, actor: null })]);
  });

  it('writes nothing for /api/health, the balancer\'s /api/live or a static asset', async () => {
    const before = lines.length;
    await request(t.app).get('/api/health');
    expect((await request(t.app).get('/api/live')).status).toBe(200);
    await request(t.app).get('/assets/index-abc123.js');
    await new Promise((r) => setImmediate(r));
    expect(lines.slice(before).filter((l) => l.msg === 'request')).toEqual([]);
  });
});
