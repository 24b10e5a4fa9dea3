import { createHash, randomBytes, webcrypto } from 'node:crypto';
import * as asn1js from 'asn1js';
import * as pkijs from 'pkijs';

// Small DER/PEM helpers shared by the institute CA, the time-stamp client and the PDF verifier.

export const cryptoEngine = new pkijs.CryptoEngine({ name: 'node-webcrypto', crypto: webcrypto as unknown as Crypto });

export function toArrayBuffer(bytes: Uint8Array): ArrayBuffer {
  return bytes.buffer.slice(bytes.byteOffset, bytes.byteOffset + bytes.byteLength) as ArrayBuffer;
}

/**
 * The content bytes of a random positive INTEGER (serial numbers, nonces) that DER encodes as it is: the first byte
 * lies in 0x01..0x7f, so the value is positive and its encoding minimal (ITU-T X.690 §8.3.2: the first nine bits are
 * neither all zero nor all one; RFC 5280 §4.1.2.2: serials are positive). A first byte of 0x00 before one below 0x80
 * is a padding that strict parsers (OpenSSL among them) refuse.
 */
export function randomPositiveInteger(length: number): Buffer {
  const bytes = randomBytes(length);
  bytes[0] = 1 + (bytes[0] % 0x7f);
  return bytes;
}

export function sha256(bytes: Uint8Array): Buffer {
  return createHash('sha256').update(bytes).digest();
}

export function pemToDer(pem: string, label = 'CERTIFICATE'): Buffer {
  const m = new RegExp(`-----BEGIN ${label}-----([^-]+)-----END ${label}-----`).exec(pem);
  if (!m) throw new Error(`no PEM block "${label}" found`);
  return Buffer.from(m[1].replace(/\s+/g, ''), 'base64');
}

/** Every certificate in a PEM bundle, in order. */
export function pemBundleToDer(pem: string): Buffer[] {
  return [...pem.matchAll(/-----BEGIN CERTIFICATE-----([^-]+)-----END CERTIFICATE-----/g)].map((m) => Buffer.from(m[1].replace(/\s+/g, ''), 'base64'));
}

export function derToPem(der: Uint8Array, label = 'CERTIFICATE'): string {
  const b64 = Buffer.from(der).toString('base64').replace(/(.{64})/g, '$1\n').replace(/\n$/, '');
  return `-----BEGIN ${label}-----\n${b64}\n-----END ${label}-----\n`;
}

export function parseCertificate(der: Uint8Array): pkijs.Certificate {
  return pkijs.Certificate.fromBER(toArrayBuffer(der));
}

export function certificateDer(cert: pkijs.Certificate): Buffer {
  return Buffer.from(cert.toSchema(true).toBER(false));
}

/** SHA-256 fingerprint as colon-separated upper-case hex, the way certificate viewers print it. */
export function fingerprintSha256(der: Uint8Array): string {
  return sha256(der).toString('hex').toUpperCase().match(/../g)!.join(':');
}

export function serialHex(cert: pkijs.Certificate): string {
  return Buffer.from(cert.serialNumber.valueBlock.valueHexView).toString('hex');
}

/** "CN=…, O=…" for display. */
export function nameToString(name: pkijs.RelativeDistinguishedNames): string {
  const short = new Map([
    ['2.5.4.3', 'CN'], ['2.5.4.10', 'O'], ['2.5.4.11', 'OU'], ['2.5.4.6', 'C'], ['2.5.4.7', 'L'],
  ]);
  return name.typesAndValues.map((tv) => `${short.get(tv.type) ?? tv.type}=${String((tv.value as asn1js.BaseStringBlock).valueBlock.value)}`).join(', ');
}

export function isIssuedBy(cert: pkijs.Certificate, issuer: pkijs.Certificate): Promise<boolean> {
  if (!cert.issuer.isEqual(issuer.subject)) return Promise.resolve(false);
  return cert.verify(issuer, cryptoEngine).catch(() => false);
}

/** Imports a PKCS#8 PEM RSA key for RSASSA-PKCS1-v1_5 with SHA-256. */
export function importSigningKey(pkcs8Pem: string): Promise<CryptoKey> {
  return webcrypto.subtle.importKey('pkcs8', pemToDer(pkcs8Pem, 'PRIVATE KEY'), { name: 'RSASSA-PKCS1-v1_5', hash: 'SHA-256' }, false, ['sign']) as Promise<CryptoKey>;
}

export const OID = {
  data: '1.2.840.113549.1.7.1',
  signedData: '1.2.840.113549.1.7.2',
  contentType: '1.2.840.113549.1.9.3',
  messageDigest: '1.2.840.113549.1.9.4',
  signingTime: '1.2.840.113549.1.9.5',
  /** RFC 5035 3: id-aa-signingCertificateV2. */
  signingCertificateV2: '1.2.840.113549.1.9.16.2.47',
  /** RFC 3161 Appendix A: id-aa-timeStampToken. */
  signatureTimeStampToken: '1.2.840.113549.1.9.16.2.14',
  /** RFC 3161 2.4.2: id-ct-TSTInfo. */
  tstInfo: '1.2.840.113549.1.9.16.1.4',
  sha256: '2.16.840.1.101.3.4.2.1',
  rsaEncryption: '1.2.840.113549.1.1.1',
  sha256WithRSA: '1.2.840.113549.1.1.11',
  /** RFC 5280 4.2.1.12. */
  kpTimeStamping: '1.3.6.1.5.5.7.3.8',
  kpEmailProtection: '1.3.6.1.5.5.7.3.4',
  /** RFC 9336 3.1: id-kp-documentSigning. */
  kpDocumentSigning: '1.3.6.1.5.5.7.3.36',
  /** Adobe's Authentic Documents Trust EKU, listed in the Adobe Acrobat "Digital Signatures Guide for IT". */
  adobeAuthenticDocumentsTrust: '1.2.840.113583.1.1.5',
  extKeyUsage: '2.5.29.37',
  keyUsage: '2.5.29.15',
  crlDistributionPoints: '2.5.29.31',
  crlNumber: '2.5.29.20',
  crlReason: '2.5.29.21',
  invalidityDate: '2.5.29.24',
  authorityKeyIdentifier: '2.5.29.35',
};

/**
 * Builds the path from `cert` up to one of `roots` through intermediates found in `pool` (RFC 5280 6.1, signatures
 * and names only; validity and purposes are checked by the caller). Returns the path, leaf first, root last.
 */
export async function chainToRoot(cert: pkijs.Certificate, roots: pkijs.Certificate[], pool: pkijs.Certificate[], maxDepth = 4): Promise<pkijs.Certificate[] | undefined> {
  const path = [cert];
  let current = cert;
  for (let depth = 0; depth <= maxDepth; depth++) {
    for (const root of roots) {
      if (certificateDer(root).equals(certificateDer(current))) return path;
      if (await isIssuedBy(current, root)) return [...path, root];
    }
    let next: pkijs.Certificate | undefined;
    for (const candidate of pool) {
      if (path.some((p) => certificateDer(p).equals(certificateDer(candidate)))) continue;
      if (isCa(candidate) && (await isIssuedBy(current, candidate))) {
        next = candidate;
        break;
      }
    }
    if (!next) return undefined;
    path.push(next);
    current = next;
  }
  return undefined;
}

function isCa(cert: pkijs.Certificate): boolean {
  const bc = cert.extensions?.find((e) => e.extnID === '2.5.29.19')?.parsedValue as pkijs.BasicConstraints | undefined;
  return bc?.cA === true;
}
