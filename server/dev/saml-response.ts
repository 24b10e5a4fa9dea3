import crypto from 'node:crypto';
import { SignedXml } from 'xml-crypto';

// Builds SAML 2.0 Responses as the local fake identity provider issues them. Tests use the same builder
// to forge bad ones (other key, unsigned, expired, wrong audience, weak algorithms, foreign issuer, odd
// status, element bombs in Extensions …), so every hostile response still carries real XML signatures.

export type SamlPerson = { email: string; displayName: string; instituteCode: string | null; role: string };

/** XML Signature algorithm URIs (W3C XML Signature 1.1 §6, RFC 6931 §2.1.3 and §2.3.2). */
export const signatureAlgorithms = {
  'rsa-sha1': 'http://www.w3.org/2000/09/xmldsig#rsa-sha1',
  'rsa-sha256': 'http://www.w3.org/2001/04/xmldsig-more#rsa-sha256',
  'rsa-sha512': 'http://www.w3.org/2001/04/xmldsig-more#rsa-sha512',
  'hmac-sha1': 'http://www.w3.org/2000/09/xmldsig#hmac-sha1',
} as const;
export const digestAlgorithms = {
  sha1: 'http://www.w3.org/2000/09/xmldsig#sha1',
  sha256: 'http://www.w3.org/2001/04/xmlenc#sha256',
  sha512: 'http://www.w3.org/2001/04/xmlenc#sha512',
} as const;
export const SAML_SUCCESS = 'urn:oasis:names:tc:SAML:2.0:status:Success';

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
  // Options below exist so tests can forge hostile responses with the real signing code.
  /** Key used for signing when it differs from keyPem (e.g. an HMAC key). */
  signingKey?: string;
  signatureAlgorithm?: keyof typeof signatureAlgorithms;
  digestAlgorithm?: keyof typeof digestAlgorithms;
  /** Top-level StatusCode value (default Success). */
  statusCode?: string;
  /** Response@Destination; null leaves the attribute out. Default: acsUrl. */
  destination?: string | null;
  /** Issuer of the Response element; null leaves it out. Default: issuer. */
  responseIssuer?: string | null;
  /** Issuer of the Assertion. Default: issuer. */
  assertionIssuer?: string;
  /** SubjectConfirmationData@Recipient. Default: acsUrl. */
  recipient?: string;
  /** SubjectConfirmationData@InResponseTo. Default: inResponseTo. */
  subjectInResponseTo?: string;
  /** Response@InResponseTo; null leaves it out (an unsolicited response). Default: inResponseTo. */
  responseInResponseTo?: string | null;
  notBefore?: Date;
  notOnOrAfter?: Date;
  /** Raw XML placed in samlp:Extensions (before signing, so the signature covers it). */
  extensionsXml?: string;
  /** Raw XML content of saml:NameID (before signing); default: the escaped e-mail. */
  nameIdXml?: string;
  /** Raw XML placed at the end of the assertion's AttributeStatement (before signing). */
  extraAttributesXml?: string;
};

const esc = (s: string) => s.replace(/&/g, '&amp;').replace(/</g, '&lt;').replace(/>/g, '&gt;').replace(/"/g, '&quot;');
const id = () => '_' + crypto.randomBytes(20).toString('hex');
const iso = (d: Date) => d.toISOString().replace(/\.\d{3}Z$/, 'Z');

function attribute(name: string, value: string | null): string {
  if (value === null) return '';
  return `<saml:Attribute Name="${name}" NameFormat="urn:oasis:names:tc:SAML:2.0:attrname-format:basic"><saml:AttributeValue xsi:type="xs:string">${esc(value)}</saml:AttributeValue></saml:Attribute>`;
}

function sign(xml: string, o: ResponseOptions, target: 'Assertion' | 'Response', afterIssuer = true): string {
  const sig = new SignedXml({
    privateKey: o.signingKey ?? o.keyPem,
    publicCert: o.certPem,
    signatureAlgorithm: signatureAlgorithms[o.signatureAlgorithm ?? 'rsa-sha256'],
    canonicalizationAlgorithm: 'http://www.w3.org/2001/10/xml-exc-c14n#',
  });
  if (o.signatureAlgorithm === 'hmac-sha1') sig.enableHMAC(); // only to forge the key-confusion attack
  const xpath = target === 'Assertion' ? "//*[local-name(.)='Assertion']" : "/*[local-name(.)='Response']";
  sig.addReference({
    xpath,
    digestAlgorithm: digestAlgorithms[o.digestAlgorithm ?? 'sha256'],
    transforms: ['http://www.w3.org/2000/09/xmldsig#enveloped-signature', 'http://www.w3.org/2001/10/xml-exc-c14n#'],
  });
  // The signature follows the Issuer (SAML Core §3.2.2, §2.3.3); without an Issuer it goes first.
  const location = afterIssuer ? { reference: `${xpath}/*[local-name(.)='Issuer']`, action: 'after' as const } : { reference: xpath, action: 'prepend' as const };
  sig.computeSignature(xml, { location });
  return sig.getSignedXml();
}

export function buildSamlResponse(o: ResponseOptions): string {
  const now = o.now ?? new Date();
  const notBefore = o.notBefore ?? new Date(now.getTime() - 30_000);
  const notOnOrAfter = o.notOnOrAfter ?? new Date(now.getTime() + (o.validitySeconds ?? 300) * 1000);
  const assertionId = id();
  const p = o.person;
  const destination = o.destination === undefined ? o.acsUrl : o.destination;
  const responseIssuer = o.responseIssuer === undefined ? o.issuer : o.responseIssuer;
  const responseInResponseTo = o.responseInResponseTo === undefined ? o.inResponseTo : o.responseInResponseTo;
  let assertion =
    `<saml:Assertion xmlns:saml="urn:oasis:names:tc:SAML:2.0:assertion" xmlns:xs="http://www.w3.org/2001/XMLSchema" xmlns:xsi="http://www.w3.org/2001/XMLSchema-instance" ID="${assertionId}" Version="2.0" IssueInstant="${iso(now)}">` +
    `<saml:Issuer>${esc(o.assertionIssuer ?? o.issuer)}</saml:Issuer>` +
    `<saml:Subject><saml:NameID Format="urn:oasis:names:tc:SAML:1.1:nameid-format:emailAddress">${o.nameIdXml ?? esc(p.email)}</saml:NameID>` +
    `<saml:SubjectConfirmation Method="urn:oasis:names:tc:SAML:2.0:cm:bearer"><saml:SubjectConfirmationData InResponseTo="${esc(o.subjectInResponseTo ?? o.inResponseTo)}" NotOnOrAfter="${iso(notOnOrAfter)}" Recipient="${esc(o.recipient ?? o.acsUrl)}"/></saml:SubjectConfirmation></saml:Subject>` +
    `<saml:Conditions NotBefore="${iso(notBefore)}" NotOnOrAfter="${iso(notOnOrAfter)}"><saml:AudienceRestriction><saml:Audience>${esc(o.audience)}</saml:Audience></saml:AudienceRestriction></saml:Conditions>` +
    `<saml:AuthnStatement AuthnInstant="${iso(now)}" SessionIndex="${id()}"><saml:AuthnContext><saml:AuthnContextClassRef>urn:oasis:names:tc:SAML:2.0:ac:classes:PasswordProtectedTransport</saml:AuthnContextClassRef></saml:AuthnContext></saml:AuthnStatement>` +
    `<saml:AttributeStatement>${attribute('email', p.email)}${attribute('displayName', p.displayName)}${attribute('institute', p.instituteCode)}${attribute('role', p.role)}${o.extraAttributesXml ?? ''}</saml:AttributeStatement>` +
    `</saml:Assertion>`;
  if (o.signAssertion !== false) assertion = sign(assertion, o, 'Assertion');
  let response =
    `<samlp:Response xmlns:samlp="urn:oasis:names:tc:SAML:2.0:protocol" xmlns:saml="urn:oasis:names:tc:SAML:2.0:assertion" ID="${id()}" Version="2.0" IssueInstant="${iso(now)}"` +
    (destination === null ? '' : ` Destination="${esc(destination)}"`) +
    (responseInResponseTo === null ? '' : ` InResponseTo="${esc(responseInResponseTo)}"`) +
    '>' +
    (responseIssuer === null ? '' : `<saml:Issuer>${esc(responseIssuer)}</saml:Issuer>`) +
    (o.extensionsXml !== undefined ? `<samlp:Extensions>${o.extensionsXml}</samlp:Extensions>` : '') +
    `<samlp:Status><samlp:StatusCode Value="${esc(o.statusCode ?? SAML_SUCCESS)}"/></samlp:Status>` +
    assertion +
    `</samlp:Response>`;
  if (o.signResponse !== false) response = sign(response, o, 'Response', responseIssuer !== null);
  return response;
}
