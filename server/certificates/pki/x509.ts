import { generateKeyPairSync } from 'node:crypto';
import * as asn1js from 'asn1js';
import forge from 'node-forge';
import * as pkijs from 'pkijs';
import { cryptoEngine, OID, parseCertificate, pemToDer, randomPositiveInteger, toArrayBuffer } from './der';

// Creating X.509 certificates (RFC 5280) with node-forge and CRLs (RFC 5280 5) with pkijs. Keys are RSA,
// generated with Node's native generator; certificates are signed once, CRLs at every issue and revocation.

export interface KeyAndCertificate {
  keyPem: string;
  certPem: string;
}

export interface DistinguishedName {
  commonName: string;
  organization: string;
  country?: string;
}

export type CertificateProfile =
  | { kind: 'root-ca'; pathLength?: number }
  | { kind: 'document-signing'; crlUrl?: string }
  | { kind: 'time-stamping'; crlUrl?: string };

function forgeName(dn: DistinguishedName): forge.pki.CertificateField[] {
  const attrs: forge.pki.CertificateField[] = [
    { name: 'commonName', value: dn.commonName },
    { name: 'organizationName', value: dn.organization },
  ];
  if (dn.country) attrs.push({ name: 'countryName', value: dn.country });
  return attrs;
}

/** Positive serial: a leading 0x00..0x7f byte keeps the DER INTEGER non-negative (RFC 5280 4.1.2.2). */
function newSerial(): string {
  return randomPositiveInteger(16).toString('hex');
}

function extensionsFor(profile: CertificateProfile): object[] {
  switch (profile.kind) {
    case 'root-ca':
      return [
        { name: 'basicConstraints', cA: true, pathLenConstraint: profile.pathLength ?? 0, critical: true },
        { name: 'keyUsage', keyCertSign: true, cRLSign: true, critical: true },
      ];
    case 'document-signing':
      return [
        { name: 'basicConstraints', cA: false, critical: true },
        { name: 'keyUsage', digitalSignature: true, nonRepudiation: true, critical: true },
        // id-kp-documentSigning (RFC 9336 3.1) and Adobe's 1.2.840.113583.1.1.5 name the purpose; emailProtection
        // (RFC 5280 4.2.1.12) is there because NSS, and so poppler's pdfsig, checks CMS signers as e-mail signers.
        { name: 'extKeyUsage', [OID.kpDocumentSigning]: true, [OID.adobeAuthenticDocumentsTrust]: true, emailProtection: true },
        ...(profile.crlUrl ? [{ name: 'cRLDistributionPoints', altNames: [{ type: 6, value: profile.crlUrl }] }] : []),
      ];
    case 'time-stamping':
      return [
        { name: 'basicConstraints', cA: false, critical: true },
        { name: 'keyUsage', digitalSignature: true, nonRepudiation: true, critical: true },
        // RFC 3161 2.3: the TSA certificate has exactly this one extended key usage, marked critical.
        { name: 'extKeyUsage', timeStamping: true, critical: true },
        ...(profile.crlUrl ? [{ name: 'cRLDistributionPoints', altNames: [{ type: 6, value: profile.crlUrl }] }] : []),
      ];
  }
}

/**
 * A new RSA key and its certificate: self-signed when `issuer` is absent (a root), otherwise signed by the
 * issuer's key. `now` and `validityYears` are parameters so tests and seeds are reproducible.
 */
export function createCertificate(opts: {
  subject: DistinguishedName;
  profile: CertificateProfile;
  issuer?: KeyAndCertificate;
  now?: Date;
  validityYears?: number;
  bits?: number;
}): KeyAndCertificate {
  const { privateKey, publicKey } = generateKeyPairSync('rsa', { modulusLength: opts.bits ?? 3072 });
  const keyPem = privateKey.export({ type: 'pkcs8', format: 'pem' }).toString();
  const cert = forge.pki.createCertificate();
  cert.publicKey = forge.pki.publicKeyFromPem(publicKey.export({ type: 'spki', format: 'pem' }).toString());
  cert.serialNumber = newSerial();
  const now = opts.now ?? new Date();
  // A minute of slack for clocks of other machines that check the certificate right away.
  cert.validity.notBefore = new Date(now.getTime() - 60_000);
  cert.validity.notAfter = new Date(now.getTime());
  cert.validity.notAfter.setUTCFullYear(now.getUTCFullYear() + (opts.validityYears ?? 10));
  cert.setSubject(forgeName(opts.subject));
  const issuerCert = opts.issuer ? forge.pki.certificateFromPem(opts.issuer.certPem) : cert;
  cert.setIssuer(issuerCert.subject.attributes);
  const authorityKeyId = opts.issuer ? issuerCert.generateSubjectKeyIdentifier().getBytes() : undefined;
  cert.setExtensions([
    ...extensionsFor(opts.profile),
    { name: 'subjectKeyIdentifier' },
    ...(authorityKeyId ? [{ name: 'authorityKeyIdentifier', keyIdentifier: authorityKeyId }] : []),
  ]);
  const signer = forge.pki.privateKeyFromPem(opts.issuer?.keyPem ?? keyPem) as forge.pki.rsa.PrivateKey;
  cert.sign(signer, forge.md.sha256.create());
  return { keyPem, certPem: forge.pki.certificateToPem(cert) };
}

export interface RevokedEntry {
  serialHex: string;
  revokedAt: Date;
  /** RFC 5280 5.3.1 CRLReason; 1 = keyCompromise. */
  reasonCode?: number;
  /** RFC 5280 5.3.2: when the key is known or suspected to have been compromised. */
  invalidityDate?: Date;
}

/** A CRL (RFC 5280 5.1) signed by `issuer`, valid for `validityDays`, with a CRL number extension (5.2.3). */
export async function createCrl(opts: {
  issuer: KeyAndCertificate;
  crlNumber: number;
  thisUpdate: Date;
  validityDays: number;
  revoked: RevokedEntry[];
}): Promise<Buffer> {
  const issuerCert = parseCertificate(pemToDer(opts.issuer.certPem));
  const crl = new pkijs.CertificateRevocationList();
  crl.version = 1;
  crl.issuer = issuerCert.subject;
  crl.thisUpdate = new pkijs.Time({ type: 0, value: opts.thisUpdate });
  crl.nextUpdate = new pkijs.Time({ type: 0, value: new Date(opts.thisUpdate.getTime() + opts.validityDays * 86_400_000) });
  if (opts.revoked.length) {
    crl.revokedCertificates = opts.revoked.map((r) => {
      const extensions: pkijs.Extension[] = [];
      if (r.reasonCode !== undefined) {
        extensions.push(new pkijs.Extension({ extnID: OID.crlReason, critical: false, extnValue: new asn1js.Enumerated({ value: r.reasonCode }).toBER(false) }));
      }
      if (r.invalidityDate) {
        extensions.push(new pkijs.Extension({ extnID: OID.invalidityDate, critical: false, extnValue: new asn1js.GeneralizedTime({ valueDate: r.invalidityDate }).toBER(false) }));
      }
      return new pkijs.RevokedCertificate({
        userCertificate: new asn1js.Integer({ valueHex: toArrayBuffer(Buffer.from(r.serialHex, 'hex')) }),
        revocationDate: new pkijs.Time({ type: 0, value: r.revokedAt }),
        ...(extensions.length ? { crlEntryExtensions: new pkijs.Extensions({ extensions }) } : {}),
      });
    });
  }
  const aki = issuerCert.extensions?.find((e) => e.extnID === '2.5.29.14');
  const keyId = aki ? (asn1js.fromBER(aki.extnValue.valueBlock.valueHexView).result as asn1js.OctetString).valueBlock.valueHexView : undefined;
  crl.crlExtensions = new pkijs.Extensions({
    extensions: [
      new pkijs.Extension({ extnID: OID.crlNumber, critical: false, extnValue: new asn1js.Integer({ value: opts.crlNumber }).toBER(false) }),
      ...(keyId
        ? [new pkijs.Extension({
            extnID: OID.authorityKeyIdentifier, critical: false,
            extnValue: new pkijs.AuthorityKeyIdentifier({ keyIdentifier: new asn1js.OctetString({ valueHex: toArrayBuffer(keyId) }) }).toSchema().toBER(false),
          })]
        : []),
    ],
  });
  const key = await cryptoEngine.importKey('pkcs8', toArrayBuffer(pemToDer(opts.issuer.keyPem, 'PRIVATE KEY')), { name: 'RSASSA-PKCS1-v1_5', hash: 'SHA-256' } as Algorithm, false, ['sign']);
  await crl.sign(key, 'SHA-256', cryptoEngine);
  return Buffer.from(crl.toSchema(true).toBER(false));
}

/** HTTP(S) addresses in a certificate's CRL distribution points extension (RFC 5280 4.2.1.13). */
export function crlUrlsOf(cert: pkijs.Certificate): string[] {
  const ext = cert.extensions?.find((e) => e.extnID === OID.crlDistributionPoints);
  const parsed = ext?.parsedValue as pkijs.CRLDistributionPoints | undefined;
  const urls: string[] = [];
  for (const dp of parsed?.distributionPoints ?? []) {
    const names = Array.isArray(dp.distributionPoint) ? dp.distributionPoint : [];
    for (const n of names) if (n.type === 6 && /^https?:\/\//.test(String(n.value))) urls.push(String(n.value));
  }
  return urls;
}

export const CRL_FETCH_LIMIT_BYTES = 4 * 1024 * 1024;

/** Fetches a CRL (DER) with a time and size limit. */
export async function fetchCrl(url: string, timeoutMs = 5000): Promise<Buffer> {
  const res = await fetch(url, { signal: AbortSignal.timeout(timeoutMs) });
  if (!res.ok) throw new Error(`CRL ${url}: HTTP ${res.status}`);
  const length = Number(res.headers.get('content-length') ?? 0);
  if (length > CRL_FETCH_LIMIT_BYTES) throw new Error(`CRL ${url} is larger than ${CRL_FETCH_LIMIT_BYTES} bytes`);
  const body = Buffer.from(await res.arrayBuffer());
  if (body.length > CRL_FETCH_LIMIT_BYTES) throw new Error(`CRL ${url} is larger than ${CRL_FETCH_LIMIT_BYTES} bytes`);
  return body;
}
