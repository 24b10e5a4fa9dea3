import fs from 'node:fs';
import http from 'node:http';
import path from 'node:path';
import zlib from 'node:zlib';
import { DOMParser } from '@xmldom/xmldom';
import { demoPeople } from '../../seeds/people';
import { buildSamlResponse, type SamlPerson } from './saml-response';
import { createSelfSignedCertificate, pemBody } from './self-signed';

// Local stand-in for an institute's identity provider, for development and tests only. It signs real
// SAML 2.0 assertions (RSA-SHA256) with its own key pair, generated on first start and kept out of git.

export type FakeIdp = { url: string; certPem: string; close: () => Promise<void> };

export function ensureIdpKeys(dir: string): { keyPem: string; certPem: string } {
  const keyFile = path.join(dir, 'idp-key.pem');
  const certFile = path.join(dir, 'idp-cert.pem');
  if (!fs.existsSync(keyFile) || !fs.existsSync(certFile)) {
    fs.mkdirSync(dir, { recursive: true, mode: 0o700 });
    const { keyPem, certPem } = createSelfSignedCertificate({ commonName: 'Chronolevel local identity provider', organization: 'Chronolevel development' });
    fs.writeFileSync(keyFile, keyPem, { mode: 0o600 });
    fs.writeFileSync(certFile, certPem);
  }
  return { keyPem: fs.readFileSync(keyFile, 'utf8'), certPem: fs.readFileSync(certFile, 'utf8') };
}

const esc = (s: string) => s.replace(/&/g, '&amp;').replace(/</g, '&lt;').replace(/>/g, '&gt;').replace(/"/g, '&quot;');

type AuthnRequest = { id: string; acsUrl: string; spIssuer: string };

export function decodeAuthnRequest(samlRequest: string): AuthnRequest {
  const xml = zlib.inflateRawSync(Buffer.from(samlRequest, 'base64')).toString('utf8');
  const doc = new DOMParser().parseFromString(xml, 'text/xml');
  const el = doc.documentElement;
  if (!el || el.localName !== 'AuthnRequest') throw new Error('not an AuthnRequest');
  const issuer = el.getElementsByTagNameNS('urn:oasis:names:tc:SAML:2.0:assertion', 'Issuer')[0]?.textContent ?? '';
  return { id: el.getAttribute('ID') ?? '', acsUrl: el.getAttribute('AssertionConsumerServiceURL') ?? '', spIssuer: issuer.trim() };
}

function page(title: string, body: string): string {
  return `<!doctype html><html lang="en"><head><meta charset="utf-8"><title>${esc(title)}</title><style>
body{font-family:system-ui,sans-serif;background:#f3efe6;color:#1d2b33;margin:0;padding:2rem}
main{max-width:40rem;margin:auto;background:#fff;border:1px solid #d6cdb9;border-radius:10px;padding:1.5rem 2rem}
h1{font-size:1.3rem;margin:.2rem 0 1rem}p.note{color:#5b6670;font-size:.9rem}
button{display:block;width:100%;text-align:left;margin:.4rem 0;padding:.7rem 1rem;border:1px solid #9fb3ad;border-radius:8px;background:#f8fbfa;font:inherit;cursor:pointer}
button:hover,button:focus{background:#e1efe9;outline:2px solid #2f6f62}small{color:#5b6670}
</style></head><body><main>${body}</main></body></html>`;
}

export async function startFakeIdp(opts: { port: number; host?: string; keysDir: string; people?: readonly SamlPerson[] }): Promise<FakeIdp> {
  const { keyPem, certPem } = ensureIdpKeys(opts.keysDir);
  const people = opts.people ?? demoPeople;
  const host = opts.host ?? '127.0.0.1';
  let base = '';

  const server = http.createServer((req, res) => {
    const url = new URL(req.url ?? '/', base);
    try {
      if (req.method === 'GET' && url.pathname === '/metadata') {
        res.setHeader('content-type', 'application/samlmetadata+xml');
        res.end(
          `<?xml version="1.0"?><md:EntityDescriptor xmlns:md="urn:oasis:names:tc:SAML:2.0:metadata" entityID="${base}/metadata">` +
            `<md:IDPSSODescriptor WantAuthnRequestsSigned="false" protocolSupportEnumeration="urn:oasis:names:tc:SAML:2.0:protocol">` +
            `<md:KeyDescriptor use="signing"><ds:KeyInfo xmlns:ds="http://www.w3.org/2000/09/xmldsig#"><ds:X509Data><ds:X509Certificate>${pemBody(certPem)}</ds:X509Certificate></ds:X509Data></ds:KeyInfo></md:KeyDescriptor>` +
            `<md:SingleSignOnService Binding="urn:oasis:names:tc:SAML:2.0:bindings:HTTP-Redirect" Location="${base}/sso"/>` +
            `</md:IDPSSODescriptor></md:EntityDescriptor>`,
        );
        return;
      }
      if (req.method === 'GET' && url.pathname === '/sso') {
        const samlRequest = url.searchParams.get('SAMLRequest');
        if (!samlRequest) {
          res.statusCode = 400;
          res.end('SAMLRequest missing');
          return;
        }
        const ar = decodeAuthnRequest(samlRequest);
        const relay = url.searchParams.get('RelayState') ?? '';
        const buttons = people
          .map(
            (p) =>
              `<form method="post" action="/sso"><input type="hidden" name="requestId" value="${esc(ar.id)}"><input type="hidden" name="acsUrl" value="${esc(ar.acsUrl)}">` +
              `<input type="hidden" name="audience" value="${esc(ar.spIssuer)}"><input type="hidden" name="relayState" value="${esc(relay)}"><input type="hidden" name="email" value="${esc(p.email)}">` +
              `<button type="submit" data-email="${esc(p.email)}"><strong>${esc(p.displayName)}</strong> — ${esc(p.role)}<br><small>${esc(p.email)} · ${esc(p.instituteCode ?? 'no institute')}</small></button></form>`,
          )
          .join('');
        res.setHeader('content-type', 'text/html; charset=utf-8');
        res.end(page('Sign in — local identity provider', `<h1>Local identity provider</h1><p class="note">Development stand-in for an institute's sign-in service. Choose a person of the invented demo scenario; a signed SAML assertion is sent to Chronolevel.</p>${buttons}`));
        return;
      }
      if (req.method === 'POST' && url.pathname === '/sso') {
        let raw = '';
        req.on('data', (c) => (raw += c));
        req.on('end', () => {
          const form = new URLSearchParams(raw);
          const person = people.find((p) => p.email === form.get('email'));
          const acsUrl = form.get('acsUrl') ?? '';
          if (!person || !/^https?:\/\//.test(acsUrl)) {
            res.statusCode = 400;
            res.end('unknown person or service provider');
            return;
          }
          const xml = buildSamlResponse({
            issuer: `${base}/metadata`,
            person,
            inResponseTo: form.get('requestId') ?? '',
            acsUrl,
            audience: form.get('audience') ?? '',
            keyPem,
            certPem,
          });
          const b64 = Buffer.from(xml).toString('base64');
          res.setHeader('content-type', 'text/html; charset=utf-8');
          res.end(
            page(
              'Signing in…',
              `<form id="f" method="post" action="${esc(acsUrl)}"><input type="hidden" name="SAMLResponse" value="${b64}"><input type="hidden" name="RelayState" value="${esc(form.get('relayState') ?? '')}"><p>Returning to Chronolevel…</p><noscript><button type="submit">Continue</button></noscript></form><script>document.getElementById('f').submit()</script>`,
            ),
          );
        });
        return;
      }
      res.statusCode = 404;
      res.end('not found');
    } catch (e) {
      res.statusCode = 400;
      res.end(`bad request: ${(e as Error).message}`);
    }
  });
  await new Promise<void>((resolve) => server.listen(opts.port, host, resolve));
  const addr = server.address();
  base = `http://${host}:${typeof addr === 'object' && addr ? addr.port : opts.port}`;
  return { url: base, certPem, close: () => new Promise((r) => server.close(() => r())) };
}
