import fs from 'node:fs';
import zlib from 'node:zlib';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, inject, it } from 'vitest';
import { buildSamlResponse } from '../../server/dev/saml-response';
import { createSelfSignedCertificate } from '../../server/dev/self-signed';
import { SP_ENTITY_ID } from '../../server/auth/saml';
import { createTestApp, signInAs, type TestApp } from '../helpers/test-app';

// SAML 2.0 sign-in through the local identity provider, and refusal of bad assertions
// (OASIS SAML 2.0 Core §2.5 conditions, Profiles §4.1.4.3 bearer subject confirmation).
let t: TestApp;
const idpKeys = () => ({
  keyPem: fs.readFileSync(inject('idpCertFile').replace('idp-cert.pem', 'idp-key.pem'), 'utf8'),
  certPem: fs.readFileSync(inject('idpCertFile'), 'utf8'),
});
const person = { email: 'ines.varga@saltmarsh-lab.invalid', displayName: 'Ines Varga', instituteCode: 'SCL', role: 'operator' };

async function startLogin() {
  const agent = request.agent(t.app);
  const res = await agent.get('/auth/saml/login');
  const samlRequest = new URL(res.headers.location).searchParams.get('SAMLRequest')!;
  const xml = zlib.inflateRawSync(Buffer.from(samlRequest, 'base64')).toString();
  const requestId = /ID="([^"]+)"/.exec(xml)![1];
  return { agent, requestId };
}

async function post(agent: ReturnType<typeof request.agent>, xml: string) {
  return agent.post('/auth/saml/callback').type('form').send({ SAMLResponse: Buffer.from(xml).toString('base64'), RelayState: '/' });
}

async function sessionCount() {
  const rows: { n: string }[] = await t.ds.query('SELECT count(*)::text AS n FROM session');
  return Number(rows[0].n);
}

beforeAll(async () => {
  t = await createTestApp();
});
afterAll(() => t.close());

describe('SAML sign-in', () => {
  it('signs in each demo role through the identity provider and returns to the app', async () => {
    for (const email of ['ines.varga@saltmarsh-lab.invalid', 'ansel.brandt@geopotential-office.invalid', 'petra.lind@audit-bureau.invalid', 'yusra.holm@geopotential-office.invalid']) {
      const { me } = await signInAs(t, email);
      expect(me.email).toBe(email);
      expect(me.via).toBe('session');
      expect(me.csrfToken).toMatch(/.{16,}/);
    }
  });

  it('publishes service provider metadata', async () => {
    const res = await request(t.app).get('/auth/saml/metadata');
    expect(res.status).toBe(200);
    expect(res.text).toContain(`entityID="${SP_ENTITY_ID}"`);
    expect(res.text).toContain('/auth/saml/callback');
  });

  const base = () => ({ issuer: `${inject('idpUrl')}/metadata`, person, acsUrl: `${t.config.publicUrl}/auth/saml/callback`, audience: SP_ENTITY_ID });

  it('accepts a correctly signed response once, and refuses its replay', async () => {
    const { agent, requestId } = await startLogin();
    const xml = buildSamlResponse({ ...base(), inResponseTo: requestId, ...idpKeys() });
    expect((await post(agent, xml)).status).toBe(303);
    const again = await post(request.agent(t.app), xml);
    expect(again.status).toBe(401);
  });

  const refusals: [string, (id: string) => string][] = [
    ['signed with another key (forged)', (id) => buildSamlResponse({ ...base(), inResponseTo: id, ...createSelfSignedCertificate({ commonName: 'mallory', organization: 'x' }) })],
    ['unsigned', (id) => buildSamlResponse({ ...base(), inResponseTo: id, ...idpKeys(), signAssertion: false, signResponse: false })],
    ['signed response but unsigned assertion', (id) => buildSamlResponse({ ...base(), inResponseTo: id, ...idpKeys(), signAssertion: false })],
    ['expired', (id) => buildSamlResponse({ ...base(), inResponseTo: id, ...idpKeys(), now: new Date(Date.now() - 3600_000), validitySeconds: 300 })],
    ['for another audience', (id) => buildSamlResponse({ ...base(), audience: 'some-other-service', inResponseTo: id, ...idpKeys() })],
    ['for another recipient', (id) => buildSamlResponse({ ...base(), acsUrl: 'http://elsewhere.invalid/acs', inResponseTo: id, ...idpKeys() })],
    ['answering a request we never made', () => buildSamlResponse({ ...base(), inResponseTo: '_never-issued', ...idpKeys() })],
  ];
  for (const [name, make] of refusals) {
    it(`refuses a response ${name} with 401 and creates no session`, async () => {
      const before = await sessionCount();
      const { agent, requestId } = await startLogin();
      const res = await post(agent, make(requestId));
      expect(res.status).toBe(401);
      expect(res.headers['content-type']).toContain('application/problem+json');
      expect(res.headers['set-cookie']).toBeUndefined();
      expect(await sessionCount()).toBe(before);
      const me = await agent.get('/api/v1/me');
      expect(me.status).toBe(401);
    });
  }

  it('signs out and the session no longer works', async () => {
    const { agent, csrf } = await signInAs(t, 'petra.lind@audit-bureau.invalid');
    expect((await agent.post('/auth/logout').set('x-csrf-token', csrf)).status).toBe(204);
    expect((await agent.get('/api/v1/me')).status).toBe(401);
  });

  it('refuses a change without the CSRF token from a signed-in browser', async () => {
    const { agent, csrf } = await signInAs(t, 'yusra.holm@geopotential-office.invalid');
    const without = await agent.post('/api/v1/me/tokens').send({ name: 'x' });
    expect(without.status).toBe(403);
    const withToken = await agent.post('/api/v1/me/tokens').set('x-csrf-token', csrf).send({ name: 'x' });
    expect(withToken.status).toBe(201);
  });

  it('sets HttpOnly, SameSite=Lax session cookies', async () => {
    const { agent, requestId } = await startLogin();
    const res = await post(agent, buildSamlResponse({ ...base(), inResponseTo: requestId, ...idpKeys() }));
    const cookie = String(res.headers['set-cookie']);
    expect(cookie).toContain('HttpOnly');
    expect(cookie).toContain('SameSite=Lax');
  });
});
