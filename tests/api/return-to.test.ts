import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createTestApp, type TestApp } from '../helpers/test-app';

// After sign-in the browser goes back where it came from — but only to a path of this site. A Location of
// `//host` or `/\host` is network-path reference to another host for browsers (WHATWG URL Standard,
// "special authority ignore slashes state": `\` counts as `/` in http(s) URLs).
let t: TestApp;
beforeAll(async () => {
  t = await createTestApp();
});
afterAll(() => t.close());

/** Signs in through the local identity provider with `returnTo` (and optionally a forged RelayState); returns the final Location. */
async function signInReturningTo(returnTo: string, forgedRelay?: string) {
  const agent = request.agent(t.app);
  const login = await agent.get(`/auth/saml/login?returnTo=${returnTo}`);
  expect(login.status).toBe(302);
  const idpSso = new URL(login.headers.location);
  const html = await (await fetch(idpSso)).text();
  const field = (n: string) => new RegExp(`name="${n}" value="([^"]*)"`).exec(html)?.[1] ?? '';
  const form = new URLSearchParams({ requestId: field('requestId'), acsUrl: field('acsUrl'), audience: field('audience'), relayState: field('relayState'), email: 'ines.varga@saltmarsh-lab.invalid' });
  const answer = await (await fetch(`${idpSso.origin}/sso`, { method: 'POST', body: form, headers: { 'content-type': 'application/x-www-form-urlencoded' } })).text();
  const samlResponse = /name="SAMLResponse" value="([^"]+)"/.exec(answer)![1];
  const relay = forgedRelay ?? (idpSso.searchParams.get('RelayState') ?? '');
  const cb = await agent.post('/auth/saml/callback').type('form').send({ SAMLResponse: samlResponse, RelayState: relay });
  expect(cb.status).toBe(303);
  return { relaySent: idpSso.searchParams.get('RelayState'), location: cb.headers.location as string };
}

describe('return address after sign-in', () => {
  it('goes back to a path of this site, query included', async () => {
    const r = await signInReturningTo(encodeURIComponent('/campaigns?state=accepted'));
    expect(r.location).toBe('/campaigns?state=accepted');
  });

  it.each([
    ['/%5Cevil.invalid/phish', 'backslash after the slash'],
    ['//evil.invalid/phish', 'two slashes'],
    ['/%09/evil.invalid', 'tab (browsers drop it, leaving //)'],
    ['https://evil.invalid/', 'an absolute URL'],
    ['evil.invalid', 'no leading slash'],
  ])('returnTo=%s (%s) sends the browser to / instead', async (returnTo) => {
    const r = await signInReturningTo(returnTo);
    expect(r.relaySent).toBe('/');
    expect(r.location).toBe('/');
  });

  it.each(['/\\evil.invalid/phish', '//evil.invalid/phish', '/\t/evil.invalid', '/\r\n/evil.invalid'])('a RelayState forged to %j is not followed either', async (relay) => {
    const r = await signInReturningTo('/', relay);
    expect(r.location).toBe('/');
  });
});
