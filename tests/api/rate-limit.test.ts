import pino from 'pino';
import request from 'supertest';
import type { DataSource } from 'typeorm';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createApp } from '../../server/app';
import { openDatabase } from '../../server/db/data-source';
import { pruneRateLimitCounters } from '../../server/http/rate-limit';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';
import { insertUploadCampaign } from '../helpers/uploads-campaign';

// Rate limits on sign-in, verification, calculators and uploads, counted in PostgreSQL: the limit is hit and answered
// with RFC 9457 429 + Retry-After, and a second app instance on the same database shares the count.
let t: TestApp;
let ds2: DataSource;
let app2: ReturnType<typeof createApp>;
const LIMITS = {
  RATE_LIMITS: 'on', RATE_LIMIT_CALC_PER_MINUTE: '4', RATE_LIMIT_SIGN_IN_PER_MINUTE: '3', RATE_LIMIT_VERIFY_PER_MINUTE: '2', RATE_LIMIT_UPLOADS_PER_MINUTE: '2',
};

beforeAll(async () => {
  t = await createTestApp({ env: LIMITS });
  // a second process's app: its own pool and Express app, same database
  ds2 = await openDatabase(t.databaseUrl, { migrate: false });
  app2 = createApp({ ...t.deps, dataSource: ds2, logger: pino({ level: 'silent' }) });
});
afterAll(async () => {
  await app2.locals.closeSessionPool?.();
  await ds2.destroy();
  await t.close();
});

const gravity = (app: typeof app2, token: string) =>
  request(app).post('/api/v1/calc/normal-gravity').set('authorization', `Bearer ${token}`).send({ latitudeDeg: 45, heightM: 100 });

function expect429(res: request.Response, limit: number) {
  expect(res.status).toBe(429);
  expect(res.headers['content-type']).toContain('application/problem+json');
  const retryAfter = Number(res.headers['retry-after']);
  expect(retryAfter).toBeGreaterThanOrEqual(1);
  expect(retryAfter).toBeLessThanOrEqual(60);
  expect(res.body).toMatchObject({ status: 429, code: 'too-many-requests', title: 'Too many requests', limit, windowSeconds: 60, retryAfterSeconds: retryAfter });
  expect(res.body.detail).toMatch(new RegExp(`At most ${limit} such requests per 60 s`));
}

describe('rate limits', () => {
  it('calculators: the 5th request in a minute answers 429 with Retry-After; the counter row is in PostgreSQL', async () => {
    const token = await tokenFor(t, 'ines.varga@saltmarsh-lab.invalid');
    for (let i = 0; i < 4; i++) expect((await gravity(t.app, token)).status).toBe(200);
    expect429(await gravity(t.app, token), 4);
    const rows: { key: string; points: number }[] = await t.ds.query("SELECT key, points FROM rate_limit WHERE key LIKE 'calc:%'");
    expect(rows).toHaveLength(1);
    expect(rows[0].points).toBe(5);
    // another person has a budget of their own
    expect((await gravity(t.app, await tokenFor(t, 'petra.lind@audit-bureau.invalid'))).status).toBe(200);
  });

  it('a second app instance on the same database shares the count', async () => {
    const token = await tokenFor(t, 'mira.ostrowe@highridge-obs.invalid');
    expect((await gravity(t.app, token)).status).toBe(200);
    expect((await gravity(app2, token)).status).toBe(200);
    expect((await gravity(t.app, token)).status).toBe(200);
    expect((await gravity(app2, token)).status).toBe(200);
    expect429(await gravity(app2, token), 4);
    expect429(await gravity(t.app, token), 4);
  });

  it('sign-in: the 4th start of a sign-in from one address answers 429 (before any SAML work)', async () => {
    for (let i = 0; i < 3; i++) expect((await request(t.app).get('/auth/saml/login?returnTo=/')).status).toBe(302);
    expect429(await request(app2).get('/auth/saml/login?returnTo=/'), 3);
    expect429(await request(t.app).post('/auth/saml/callback').type('form').send({ SAMLResponse: 'x' }), 3);
  });

  it('public verification: the 3rd check answers 429', async () => {
    for (let i = 0; i < 2; i++) {
      const res = await request(t.app).get('/api/v1/certificates/verify').query({ number: 'XYZ', sha256: '12' });
      expect(res.status).toBe(400);
    }
    expect429(await request(t.app).get('/api/v1/certificates/verify').query({ number: 'XYZ', sha256: '12' }), 2);
  });

  it('uploads: the 3rd upload request in a minute answers 429 and stores nothing', async () => {
    const token = await tokenFor(t, 'ines.varga@saltmarsh-lab.invalid');
    const campaignId = await insertUploadCampaign(t.ds);
    const send = (app: typeof app2) => request(app).post(`/api/v1/campaigns/${campaignId}/uploads/preview`).set('authorization', `Bearer ${token}`)
      .attach('file', Buffer.from('61100.0,1e-17\n61100.1,2e-17\n'), 'a.csv');
    expect((await send(t.app)).status).toBe(200);
    expect((await send(app2)).status).toBe(200);
    const [{ n: before }] = await t.ds.query('SELECT count(*)::int AS n FROM ratio_series');
    const refused = await request(t.app).post(`/api/v1/campaigns/${campaignId}/uploads`).set('authorization', `Bearer ${token}`)
      .field('epochColumn', '1').field('epochKind', 'mjd').field('valueColumn', '2').field('valueKind', 'offset')
      .attach('file', Buffer.from('61100.0,1e-17\n61100.1,2e-17\n'), 'a.csv');
    expect429(refused, 2);
    const [{ n: after }] = await t.ds.query('SELECT count(*)::int AS n FROM ratio_series');
    expect(after).toBe(before);
  });

  it('expired counters are pruned', async () => {
    const [{ n: total }] = await t.ds.query('SELECT count(*)::int AS n FROM rate_limit');
    expect(total).toBeGreaterThan(0);
    expect(await pruneRateLimitCounters(t.ds, Date.now())).toBe(0);
    expect(await pruneRateLimitCounters(t.ds, Date.now() + 61_000)).toBe(total);
    const [{ n: left }] = await t.ds.query('SELECT count(*)::int AS n FROM rate_limit');
    expect({ left, rows: await t.ds.query('SELECT * FROM rate_limit') }).toEqual({ left: 0, rows: [] });
  });
});
