// Benchmark: what a hostile SAML response costs before and after the pre-checks of server/auth/saml-guard.ts.
// Run with `npx tsx tests/bench/saml-guard.bench.ts`; prints figures, never fails on time.
import { SAML } from '@node-saml/node-saml';
import { decodeSamlResponse, inspectSamlResponse, SamlRefusal, scanSamlXml } from '../../server/auth/saml-guard';
import { buildSamlResponse } from '../../server/dev/saml-response';
import { createSelfSignedCertificate } from '../../server/dev/self-signed';

const keys = createSelfSignedCertificate({ commonName: 'bench identity provider', organization: 'bench' });
const acsUrl = 'http://127.0.0.1:8080/auth/saml/callback';
const issuer = 'http://127.0.0.1:8180/metadata';
const person = { email: 'ines.varga@saltmarsh-lab.invalid', displayName: 'Ines Varga', instituteCode: 'SCL', role: 'operator' };
const respond = (extensionsXml?: string) =>
  Buffer.from(buildSamlResponse({ issuer, person, inResponseTo: '_bench', acsUrl, audience: 'chronolevel', ...keys, extensionsXml })).toString('base64');

function timeIt(runs: number, f: () => unknown): number {
  const t: number[] = [];
  for (let i = 0; i < runs; i++) {
    const t0 = performance.now();
    f();
    t.push(performance.now() - t0);
  }
  return t.sort((a, b) => a - b)[Math.floor(runs / 2)];
}
const guard = (b64: string) => () => {
  try {
    const xml = decodeSamlResponse(b64);
    scanSamlXml(xml);
    inspectSamlResponse(xml, { destination: acsUrl, idpIssuer: issuer });
    return 'passed';
  } catch (e) {
    if (e instanceof SamlRefusal) return e.reason;
    throw e;
  }
};

const normal = respond();
console.log(`normal signed response (${(normal.length / 1024).toFixed(1)} KB base64): pre-checks median ${timeIt(50, guard(normal)).toFixed(2)} ms`);
for (const [label, ext] of [
  ['80 000 empty elements + padding (1 MB)', '<x/>'.repeat(80_000) + ' '.repeat(700_000)],
  ['40 000 empty elements (180 KB)', '<x/>'.repeat(40_000)],
  ['3 000 nested elements', '<d>'.repeat(3000) + '</d>'.repeat(3000)],
] as const) {
  const b64 = respond(ext);
  console.log(`${label}, ${(b64.length / 1024).toFixed(0)} KB base64: refused (${guard(b64)()}) by the pre-checks in median ${timeIt(10, guard(b64)).toFixed(2)} ms` +
    (b64.length > 256 * 1024 ? ' — over the 256 KB body limit, so the callback refuses it before even decoding' : ''));
}

// Without the pre-checks: node-saml's signature validation (XPath over the whole document) on growing bombs.
const saml = new SAML({ idpCert: keys.certPem, issuer: 'chronolevel', audience: 'chronolevel', callbackUrl: acsUrl, wantAssertionsSigned: true, wantAuthnResponseSigned: true, validateInResponseTo: 'never' as never });
await saml.validatePostResponseAsync({ SAMLResponse: respond() }).catch(() => null); // warm-up
for (const n of [2_500, 5_000, 10_000, 20_000]) {
  const b64 = respond('<x/>'.repeat(n));
  const t0 = performance.now();
  await saml.validatePostResponseAsync({ SAMLResponse: b64 }).catch(() => null);
  const ms = performance.now() - t0;
  console.log(`without pre-checks: node-saml validation of a response with ${n} extra elements: ${ms.toFixed(0)} ms`);
}
console.log('(growing faster than the element count; the unguarded callback spent about 47 s on 40 000 elements and 100 s on 80 000)');
