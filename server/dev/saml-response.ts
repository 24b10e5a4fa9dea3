import crypto from 'node:crypto';
import { SignedXml } from 'xml-crypto';

// Builds SAML 2.0 Responses as the local fake identity provider issues them. Tests use the same builder
// to forge bad ones (other key, unsigned, expired, wrong audience), so both go through real XML signatures.

export type SamlPerson = { email: string; displayName: string; instituteCode: string | null; role: string };

export type ResponseOptions = {
  issuer: string;
  person: SamlPerson;
  inResponseTo: string;
  acsUrl: string;
  audience: string;
  keyPem: string;
  certPem: string;
  now?: Date;
  validitySeconds?: number;
  signAssertion?: boolean;
  signResponse?: boolean;
};

const esc = (s: string) => s.replace(/&/g, '&amp;').replace(/</g, '&lt;').replace(/>/g, '&gt;').replace(/"/g, '&quot;');
const id = () => '_' + crypto.randomBytes(20).toString('hex');
const iso = (d: Date) => d.toISOString().replace(/\.\d{3}Z$/, 'Z');

function attribute(name: string, value: string | null): string {
  if (value === null) return '';
  return `<saml:Attribute Name="${name}" NameFormat="urn:oasis:names:tc:SAML:2.0:attrname-format:basic"><saml:AttributeValue xsi:type="xs:string">${esc(value)}</saml:AttributeValue></saml:Attribute>`;
}

function sign(xml: string, keyPem: string, certPem: string, target: 'Assertion' | 'Response'): string {
  const sig = new SignedXml({
    privateKey: keyPem,
    publicCert: certPem,
    signatureAlgorithm: 'http://www.w3.org/2001/04/xmldsig-more#rsa-sha256',
    canonicalizationAlgorithm: 'http://www.w3.org/2001/10/xml-exc-c14n#',
  });
  const xpath = target === 'Assertion' ? "//*[local-name(.)='Assertion']" : "/*[local-name(.)='Response']";
  sig.addReference({
    xpath,
    digestAlgorithm: 'http://www.w3.org/2001/04/xmlenc#sha256',
    transforms: ['http://www.w3.org/2000/09/xmldsig#enveloped-signature', 'http://www.w3.org/2001/10/xml-exc-c14n#'],
  });
  sig.computeSignature(xml, { location: { reference: `${xpath}/*[local-name(.)='Issuer']`, action: 'after' } });
  return sig.getSignedXml();
}

export function buildSamlResponse(o: ResponseOptions): string {
  const now = o.now ?? new Date();
  const notBefore = new Date(now.getTime() - 30_000);
  const notOnOrAfter = new Date(now.getTime() + (o.validitySeconds ?? 300) * 1000);
  const assertionId = id();
  const p = o.person;
  let assertion =
    `<saml:Assertion xmlns:saml="urn:oasis:names:tc:SAML:2.0:assertion" xmlns:xs="http://www.w3.org/2001/XMLSchema" xmlns:xsi="http://www.w3.org/2001/XMLSchema-instance" ID="${assertionId}" Version="2.0" IssueInstant="${iso(now)}">` +
    `<saml:Issuer>${esc(o.issuer)}</saml:Issuer>` +
    `<saml:Subject><saml:NameID Format="urn:oasis:names:tc:SAML:1.1:nameid-format:emailAddress">${esc(p.email)}</saml:NameID>` +
    `<saml:SubjectConfirmation Method="urn:oasis:names:tc:SAML:2.0:cm:bearer"><saml:SubjectConfirmationData InResponseTo="${esc(o.inResponseTo)}" NotOnOrAfter="${iso(notOnOrAfter)}" Recipient="${esc(o.acsUrl)}"/></saml:SubjectConfirmation></saml:Subject>` +
    `<saml:Conditions NotBefore="${iso(notBefore)}" NotOnOrAfter="${iso(notOnOrAfter)}"><saml:AudienceRestriction><saml:Audience>${esc(o.audience)}</saml:Audience></saml:AudienceRestriction></saml:Conditions>` +
    `<saml:AuthnStatement AuthnInstant="${iso(now)}" SessionIndex="${id()}"><saml:AuthnContext><saml:AuthnContextClassRef>urn:oasis:names:tc:SAML:2.0:ac:classes:PasswordProtectedTransport</saml:AuthnContextClassRef></saml:AuthnContext></saml:AuthnStatement>` +
    `<saml:AttributeStatement>${attribute('email', p.email)}${attribute('displayName', p.displayName)}${attribute('institute', p.instituteCode)}${attribute('role', p.role)}</saml:AttributeStatement>` +
    `</saml:Assertion>`;
  if (o.signAssertion !== false) assertion = sign(assertion, o.keyPem, o.certPem, 'Assertion');
  let response =
    `<samlp:Response xmlns:samlp="urn:oasis:names:tc:SAML:2.0:protocol" xmlns:saml="urn:oasis:names:tc:SAML:2.0:assertion" ID="${id()}" Version="2.0" IssueInstant="${iso(now)}" Destination="${esc(o.acsUrl)}" InResponseTo="${esc(o.inResponseTo)}">` +
    `<saml:Issuer>${esc(o.issuer)}</saml:Issuer>` +
    `<samlp:Status><samlp:StatusCode Value="urn:oasis:names:tc:SAML:2.0:status:Success"/></samlp:Status>` +
    assertion +
    `</samlp:Response>`;
  if (o.signResponse !== false) response = sign(response, o.keyPem, o.certPem, 'Response');
  return response;
}
