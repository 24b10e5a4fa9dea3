import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';

let t: TestApp;
beforeAll(async () => {
  t = await createTestApp();
});
afterAll(() => t.close());

describe('health, errors and OpenAPI', () => {
  it('reports database health', async () => {
    const res = await request(t.app).get('/api/health');
    expect(res.status).toBe(200);
    expect(res.body).toMatchObject({ status: 'ok', database: 'ok', pool: { inUse: expect.any(Number), waiting: 0 } });
  });

  it('renders validation errors as problem+json with field paths (RFC 9457)', async () => {
    const token = await tokenFor(t, 'yusra.holm@geopotential-office.invalid');
    const res = await request(t.app).post('/api/v1/institutes').set('authorization', `Bearer ${token}`).send({ code: 'lower case', kind: 'castle' });
    expect(res.status).toBe(400);
    expect(res.headers['content-type']).toContain('application/problem+json');
    const paths = res.body.issues.map((i: { path: string }) => i.path);
    expect(paths).toEqual(expect.arrayContaining(['body.code', 'body.name', 'body.kind']));
    expect(res.body).not.toHaveProperty('stack');
  });

  it('answers unknown API routes with 404 problem+json', async () => {
    const res = await request(t.app).get('/api/v1/nothing-here');
    expect(res.status).toBe(404);
    expect(res.body.code).toBe('not-found');
  });

  it('answers malformed JSON with 400', async () => {
    const token = await tokenFor(t, 'yusra.holm@geopotential-office.invalid');
    const res = await request(t.app).post('/api/v1/institutes').set('authorization', `Bearer ${token}`).set('content-type', 'application/json').send('{"code":');
    expect(res.status).toBe(400);
  });

  it('publishes an OpenAPI 3.1 document generated from the route schemas', async () => {
    const res = await request(t.app).get('/api/v1/openapi.json');
    expect(res.status).toBe(200);
    expect(res.body.openapi).toBe('3.1.0');
    expect(res.body.paths['/api/v1/institutes'].post.requestBody).toBeDefined();
  });
});

describe('API tokens', () => {
  it('a token carries its owner role; a revoked token stops working; only the hash is stored', async () => {
    const token = await tokenFor(t, 'ines.varga@saltmarsh-lab.invalid');
    const me = await request(t.app).get('/api/v1/me').set('authorization', `Bearer ${token}`);
    expect(me.body).toMatchObject({ role: 'operator', via: 'token' });
    const stored: { token_hash: string }[] = await t.ds.query('SELECT token_hash FROM api_token');
    expect(stored.some((s) => s.token_hash === token)).toBe(false);
    const list = await request(t.app).get('/api/v1/me/tokens').set('authorization', `Bearer ${token}`);
    await request(t.app).delete(`/api/v1/me/tokens/${list.body.items[0].id}`).set('authorization', `Bearer ${token}`).expect(204);
    expect((await request(t.app).get('/api/v1/me').set('authorization', `Bearer ${token}`)).status).toBe(401);
  });
});

describe('audit trail', () => {
  it('is append-only in the database: UPDATE, DELETE and TRUNCATE fail', async () => {
    // the application role lacks the privilege; the owner role still meets the append-only trigger
    await expect(t.ds.query("UPDATE audit_event SET action = 'x'")).rejects.toThrow(/append-only|permission denied/);
    await expect(t.ds.query('DELETE FROM audit_event')).rejects.toThrow(/append-only|permission denied/);
    await expect(t.ds.query('TRUNCATE audit_event')).rejects.toThrow(/append-only|permission denied/);
  });

  it('chains each event to the previous one by hash', async () => {
    const rows: { prev_hash: string | null; hash: string }[] = await t.ds.query('SELECT prev_hash, hash FROM audit_event ORDER BY id');
    expect(rows.length).toBeGreaterThan(0);
    for (let i = 1; i < rows.length; i++) expect(rows[i].prev_hash).toBe(rows[i - 1].hash);
    expect(rows.every((r) => /^[0-9a-f]{64}$/.test(r.hash))).toBe(true);
  });
});
