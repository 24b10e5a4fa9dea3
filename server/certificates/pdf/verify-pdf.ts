import { createHash, webcrypto } from 'node:crypto';
import * as asn1js from 'asn1js';
import * as pkijs from 'pkijs';

// Verifies a signed certificate PDF against the pinned institute certificate. Checks follow
// ISO 32000-1:2008 12.8.1 (the /ByteRange must cover the whole file except the /Contents hex
// string) and RFC 5652 5.4/11.2 (the signed messageDigest attribute must equal the digest of the
// signed bytes, and the signature over the signed attributes must verify with the signer's key).

export type VerificationStatus = 'valid' | 'tampered' | 'unsigned';

export interface VerificationResult {
  status: VerificationStatus;
  /** Why the file is not valid; absent when it is. */
  reason?: string;
  /** SHA-256 (hex) of the bytes the /ByteRange covers. */
  signedDigestSha256?: string;
  /** The CMS signingTime attribute, ISO 8601. */
  signingTime?: string;
  /** From the document information dictionary (/CertificateNumber), for looking the record up. */
  certificateNumber?: string;
}

const OID = {
  signedData: '1.2.840.113549.1.7.2',
  messageDigest: '1.2.840.113549.1.9.4',
  signingTime: '1.2.840.113549.1.9.5',
  sha256: '2.16.840.1.101.3.4.2.1',
};

const engine = new pkijs.CryptoEngine({ name: 'node-webcrypto', crypto: webcrypto as unknown as Crypto });

const BYTE_RANGE = /\/ByteRange\s*\[\s*(\d+)\s+(\d+)\s+(\d+)\s+(\d+)\s*\]/g;

function isWhitespace(byte: number): boolean {
  return byte === 0x20 || byte === 0x0a || byte === 0x0d || byte === 0x09 || byte === 0x0c || byte === 0x00;
}

function isHexDigit(byte: number): boolean {
  return (byte >= 0x30 && byte <= 0x39) || (byte >= 0x41 && byte <= 0x46) || (byte >= 0x61 && byte <= 0x66);
}

function toArrayBuffer(bytes: Uint8Array): ArrayBuffer {
  return bytes.buffer.slice(bytes.byteOffset, bytes.byteOffset + bytes.byteLength) as ArrayBuffer;
}

function pemToDer(pem: string): Buffer {
  const body = pem.replace(/-----BEGIN CERTIFICATE-----|-----END CERTIFICATE-----|\s+/g, '');
  if (!body) throw new Error('pinned certificate PEM is empty');
  return Buffer.from(body, 'base64');
}

function certificateDer(cert: pkijs.Certificate): Buffer {
  return Buffer.from(cert.toSchema(true).toBER(false));
}

const CERTIFICATE_NUMBER_LITERAL = /^\s*\((CL-\d{4}-\d{5}-r\d+)\)/;

/** pdfkit writes info values either inline or as indirect string objects; accept both. */
function findCertificateNumber(text: string): string | undefined {
  const entry = /\/CertificateNumber\s*(?:(\d+)\s+(\d+)\s+R|(\([^)]*\)))/.exec(text);
  if (!entry) return undefined;
  if (entry[3]) return CERTIFICATE_NUMBER_LITERAL.exec(entry[3])?.[1];
  const object = new RegExp(`(?:^|[\\r\\n])${entry[1]}\\s+${entry[2]}\\s+obj\\s*([^]*?)endobj`).exec(text);
  return object ? CERTIFICATE_NUMBER_LITERAL.exec(object[1])?.[1] : undefined;
}

function attributeValue(signerInfo: pkijs.SignerInfo, oid: string): asn1js.AsnType | undefined {
  return signerInfo.signedAttrs?.attributes.find((a) => a.type === oid)?.values[0];
}

/**
 * Checks a signed certificate PDF. A file signed by any certificate other than `pinnedCertificatePem`
 * is reported as 'tampered' (with a reason saying so): for an auditor a foreign signer is as bad as
 * an edited file, and the reason string keeps the two apart for the audit trail.
 */
export async function verifySignedPdf(pdf: Buffer, pinnedCertificatePem: string): Promise<VerificationResult> {
  const text = pdf.toString('latin1');
  const certificateNumber = findCertificateNumber(text);
  const base = certificateNumber ? { certificateNumber } : {};

  const ranges = [...text.matchAll(BYTE_RANGE)];
  if (ranges.length === 0) {
    const reason = /\/ByteRange\s*\[/.test(text) ? 'signature placeholder was never filled' : 'no signature dictionary found';
    return { ...base, status: 'unsigned', reason };
  }
  if (ranges.length > 1) {
    return { ...base, status: 'tampered', reason: `${ranges.length} signatures found; a certificate carries exactly one` };
  }

  const [a, b, c, d] = ranges[0].slice(1, 5).map(Number);
  const tampered = (reason: string, extra: Partial<VerificationResult> = {}): VerificationResult => ({ ...base, ...extra, status: 'tampered', reason });

  if (a !== 0) return tampered('signed byte range does not start at the beginning of the file');
  if (!(b > 0 && c > b + 1 && c + d === pdf.length)) {
    if (!(b > 0 && c > b + 1) || c + d > pdf.length) return tampered('signed byte range does not match the file length');
    // The file is longer than what was signed. If the signature gap still sits where the byte range says, the extra
    // bytes follow the signed range (an incremental update); otherwise they were put in before the signature.
    const extra = pdf.length - (c + d);
    return tampered(
      pdf[b] === 0x3c && pdf[c - 1] === 0x3e
        ? `bytes after the signed range: ${extra} bytes were appended (incremental update) after signing`
        : `${extra} bytes were put into the file before the signature, or bytes inside it were changed, after signing (the signed byte range no longer lines up with the file)`,
    );
  }
  if (pdf[b] !== 0x3c || pdf[c - 1] !== 0x3e) return tampered('the gap in the signed byte range is not a hex string');
  for (let i = b + 1; i < c - 1; i++) {
    if (!isHexDigit(pdf[i])) return tampered('the gap in the signed byte range holds more than the signature');
  }
  // The gap must be the /Contents value of a signature dictionary, not some other hex string.
  let k = b - 1;
  while (k >= 0 && isWhitespace(pdf[k])) k--;
  if (pdf.subarray(Math.max(0, k - 8), k + 1).toString('latin1') !== '/Contents') {
    return tampered('the gap in the signed byte range is not the signature /Contents');
  }

  const signedBytes = Buffer.concat([pdf.subarray(a, a + b), pdf.subarray(c, c + d)]);
  const digest = createHash('sha256').update(signedBytes).digest();
  const signedDigestSha256 = digest.toString('hex');
  const withDigest = (reason: string, extra: Partial<VerificationResult> = {}) => tampered(reason, { signedDigestSha256, ...extra });

  const cmsBytes = Buffer.from(pdf.subarray(b + 1, c - 1).toString('latin1'), 'hex');
  const asn = asn1js.fromBER(toArrayBuffer(cmsBytes));
  if (asn.offset === -1) return withDigest('signature is not valid DER/BER');
  // The placeholder is zero-padded; anything else after the CMS blob is not ours.
  if (cmsBytes.subarray(asn.offset).some((byte) => byte !== 0)) return withDigest('data after the CMS signature in /Contents');
  let signedData: pkijs.SignedData;
  try {
    const contentInfo = new pkijs.ContentInfo({ schema: asn.result });
    if (contentInfo.contentType !== OID.signedData) return withDigest('signature is not CMS SignedData');
    signedData = new pkijs.SignedData({ schema: contentInfo.content });
  } catch (err) {
    return withDigest(`signature cannot be parsed as CMS: ${(err as Error).message}`);
  }
  if (signedData.signerInfos.length !== 1) return withDigest(`expected one signer, found ${signedData.signerInfos.length}`);
  const signerInfo = signedData.signerInfos[0];

  const signingTimeAttr = attributeValue(signerInfo, OID.signingTime);
  const signingTime =
    signingTimeAttr instanceof asn1js.UTCTime || signingTimeAttr instanceof asn1js.GeneralizedTime ? signingTimeAttr.toDate().toISOString() : undefined;
  const withTime = (reason: string) => withDigest(reason, signingTime ? { signingTime } : {});

  if (signerInfo.digestAlgorithm.algorithmId !== OID.sha256) return withTime(`unsupported digest algorithm ${signerInfo.digestAlgorithm.algorithmId}`);

  const messageDigest = attributeValue(signerInfo, OID.messageDigest);
  if (!(messageDigest instanceof asn1js.OctetString)) return withTime('signed attributes carry no messageDigest');
  if (!Buffer.from(messageDigest.valueBlock.valueHexView).equals(digest)) {
    return withTime('messageDigest in the signature does not match the file: the signed bytes were changed');
  }

  // Trust only the pinned certificate: the embedded one is merely used to find the signer.
  let pinned: pkijs.Certificate;
  try {
    pinned = pkijs.Certificate.fromBER(toArrayBuffer(pemToDer(pinnedCertificatePem)));
  } catch (err) {
    throw new Error(`pinned institute certificate cannot be parsed: ${(err as Error).message}`, { cause: err });
  }
  const sid = signerInfo.sid;
  const signerCert = (signedData.certificates ?? []).find(
    (item): item is pkijs.Certificate =>
      item instanceof pkijs.Certificate &&
      sid instanceof pkijs.IssuerAndSerialNumber &&
      item.issuer.isEqual(sid.issuer) &&
      item.serialNumber.isEqual(sid.serialNumber),
  );
  if (!signerCert) return withTime('the signer certificate is not included in the signature');
  if (!certificateDer(signerCert).equals(certificateDer(pinned))) {
    return withTime('signed with a certificate other than the pinned institute certificate');
  }

  // Verify with the pinned certificate itself, so no embedded data can stand in for it.
  signedData.certificates = [pinned];
  let signatureVerified: boolean;
  try {
    const result = await signedData.verify(
      { signer: 0, data: toArrayBuffer(signedBytes), checkChain: false, extendedMode: true },
      engine,
    );
    signatureVerified = result.signatureVerified === true;
  } catch (err) {
    return withTime(`signature does not verify: ${(err as Error).message}`);
  }
  if (!signatureVerified) return withTime('signature does not verify with the pinned certificate');

  return { ...base, status: 'valid', signedDigestSha256, ...(signingTime ? { signingTime } : {}) };
}
