import { createPublicKey, verify as cryptoVerify } from 'node:crypto';
import * as asn1js from 'asn1js';
import * as pkijs from 'pkijs';
import { certificateDer, cryptoEngine, importSigningKey, OID, parseCertificate, sha256, toArrayBuffer } from './der';

// CMS SignedData (RFC 5652) with the signed attributes a CAdES signature and an RFC 3161 token both need:
// content-type, message-digest and ESS signing-certificate-v2 (RFC 5035 3, which binds the signer certificate
// by its SHA-256 so it cannot be substituted).

export function attribute(type: string, value: asn1js.AsnType): pkijs.Attribute {
  return new pkijs.Attribute({ type, values: [value] });
}

/** SigningCertificateV2 ::= SEQUENCE { certs SEQUENCE OF ESSCertIDv2 } with hashAlgorithm left at its DEFAULT, SHA-256. */
export function signingCertificateV2(cert: pkijs.Certificate): asn1js.Sequence {
  const issuerSerial = new asn1js.Sequence({
    value: [
      new pkijs.GeneralNames({ names: [new pkijs.GeneralName({ type: 4, value: cert.issuer })] }).toSchema(),
      new asn1js.Integer({ valueHex: toArrayBuffer(new Uint8Array(cert.serialNumber.valueBlock.valueHexView)) }),
    ],
  });
  const essCertId = new asn1js.Sequence({ value: [new asn1js.OctetString({ valueHex: toArrayBuffer(sha256(certificateDer(cert))) }), issuerSerial] });
  return new asn1js.Sequence({ value: [new asn1js.Sequence({ value: [essCertId] })] });
}

/** The certificate hash an ESS signing-certificate-v2 attribute names (first ESSCertIDv2), if it is SHA-256. */
export function signingCertificateV2Hash(signerInfo: pkijs.SignerInfo): Buffer | undefined {
  const value = signerInfo.signedAttrs?.attributes.find((a) => a.type === OID.signingCertificateV2)?.values[0];
  if (!(value instanceof asn1js.Sequence)) return undefined;
  const certs = value.valueBlock.value[0];
  if (!(certs instanceof asn1js.Sequence)) return undefined;
  const first = certs.valueBlock.value[0];
  if (!(first instanceof asn1js.Sequence)) return undefined;
  const [a] = first.valueBlock.value;
  // A leading AlgorithmIdentifier means a hash other than the default SHA-256 unless it names SHA-256.
  if (a instanceof asn1js.Sequence) {
    const alg = new pkijs.AlgorithmIdentifier({ schema: a });
    const hash = first.valueBlock.value[1];
    return alg.algorithmId === OID.sha256 && hash instanceof asn1js.OctetString ? Buffer.from(hash.valueBlock.valueHexView) : undefined;
  }
  return a instanceof asn1js.OctetString ? Buffer.from(a.valueBlock.valueHexView) : undefined;
}

export interface CmsSigner {
  keyPem: string;
  certificate: Buffer;
  /** Further certificates to include (the chain up to and including the root). */
  chain: Buffer[];
}

/**
 * Signs `digest` (the SHA-256 of the content) as a CMS SignedData. Detached when `eContent` is absent (PDF
 * signatures, ISO 32000-1 12.8.3.3), encapsulated otherwise (time-stamp tokens).
 */
export async function createSignedData(opts: {
  signer: CmsSigner;
  digest: Buffer;
  eContentType: string;
  eContent?: Buffer;
  extraSignedAttributes?: pkijs.Attribute[];
}): Promise<pkijs.SignedData> {
  const cert = parseCertificate(opts.signer.certificate);
  const signedData = new pkijs.SignedData({
    version: opts.eContent ? 3 : 1,
    encapContentInfo: new pkijs.EncapsulatedContentInfo({
      eContentType: opts.eContentType,
      ...(opts.eContent ? { eContent: new asn1js.OctetString({ valueHex: toArrayBuffer(opts.eContent) }) } : {}),
    }),
    signerInfos: [
      new pkijs.SignerInfo({
        version: 1,
        sid: new pkijs.IssuerAndSerialNumber({ issuer: cert.issuer, serialNumber: cert.serialNumber }),
      }),
    ],
    certificates: [cert, ...opts.signer.chain.map(parseCertificate)],
  });
  signedData.signerInfos[0].signedAttrs = new pkijs.SignedAndUnsignedAttributes({
    type: 0,
    attributes: [
      attribute(OID.contentType, new asn1js.ObjectIdentifier({ value: opts.eContentType })),
      attribute(OID.messageDigest, new asn1js.OctetString({ valueHex: toArrayBuffer(opts.digest) })),
      attribute(OID.signingCertificateV2, signingCertificateV2(cert)),
      ...(opts.extraSignedAttributes ?? []),
    ],
  });
  await signedData.sign(await importSigningKey(opts.signer.keyPem), 0, 'SHA-256', undefined, cryptoEngine);
  return signedData;
}

export function signedDataToDer(signedData: pkijs.SignedData): Buffer {
  const contentInfo = new pkijs.ContentInfo({ contentType: OID.signedData, content: signedData.toSchema(true) });
  return Buffer.from(contentInfo.toSchema().toBER(false));
}

/** Adds an RFC 3161 token as the signature time-stamp (unsigned attribute id-aa-signatureTimeStampToken, RFC 3161 Appendix A). */
export function addSignatureTimeStamp(signedData: pkijs.SignedData, token: Buffer): void {
  const asn = asn1js.fromBER(toArrayBuffer(token));
  if (asn.offset === -1) throw new Error('time-stamp token is not valid DER');
  signedData.signerInfos[0].unsignedAttrs = new pkijs.SignedAndUnsignedAttributes({ type: 1, attributes: [attribute(OID.signatureTimeStampToken, asn.result)] });
}

export function signatureValue(signedData: pkijs.SignedData): Buffer {
  return Buffer.from(signedData.signerInfos[0].signature.valueBlock.valueHexView);
}

const RSA_SIGNATURE_ALGORITHMS = new Set([OID.rsaEncryption, OID.sha256WithRSA]);

/**
 * Checks a SignerInfo's signature over its DER-encoded signed attributes (RFC 5652 5.4: re-tagged as SET OF)
 * with the public key of `cert`. Only RSASSA-PKCS1-v1_5 with SHA-256 is accepted.
 */
export function signerInfoSignatureVerifies(signerInfo: pkijs.SignerInfo, cert: pkijs.Certificate): boolean {
  if (!signerInfo.signedAttrs) return false;
  if (signerInfo.digestAlgorithm.algorithmId !== OID.sha256) return false;
  if (!RSA_SIGNATURE_ALGORITHMS.has(signerInfo.signatureAlgorithm.algorithmId)) return false;
  const encoded = Buffer.from(signerInfo.signedAttrs.encodedValue);
  if (encoded.length === 0) return false;
  const tbs = Buffer.from(encoded);
  tbs[0] = 0x31;
  const spki = Buffer.from(cert.subjectPublicKeyInfo.toSchema().toBER(false));
  const key = createPublicKey({ key: spki, format: 'der', type: 'spki' });
  return cryptoVerify('sha256', tbs, key, Buffer.from(signerInfo.signature.valueBlock.valueHexView));
}
