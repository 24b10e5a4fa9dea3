import * as asn1js from 'asn1js';
import * as pkijs from 'pkijs';
import { signerInfoSignatureVerifies } from './cms';
import { certificateDer, chainToRoot, OID, parseCertificate, randomPositiveInteger, sha256, toArrayBuffer } from './der';

// RFC 3161 time-stamp protocol: the client side (request over HTTP, 3.4) and the checks of a returned token
// (2.4.2: the imprint, the nonce, the TSA's signature and its certificate's purpose).

export const TSA_REQUEST_LIMIT_BYTES = 64 * 1024;

export function buildTimeStampRequest(digest: Buffer, nonce: Buffer): Buffer {
  const req = new pkijs.TimeStampReq({
    version: 1,
    messageImprint: new pkijs.MessageImprint({
      hashAlgorithm: new pkijs.AlgorithmIdentifier({ algorithmId: OID.sha256 }),
      hashedMessage: new asn1js.OctetString({ valueHex: toArrayBuffer(digest) }),
    }),
    nonce: new asn1js.Integer({ valueHex: toArrayBuffer(nonce) }),
    certReq: true,
  });
  return Buffer.from(req.toSchema().toBER(false));
}

/** Asks the TSA at `url` for a token over `digest` (SHA-256) and returns the token (a CMS ContentInfo, DER). */
export async function requestTimeStamp(url: string, digest: Buffer, timeoutMs = 10_000): Promise<Buffer> {
  const nonce = randomPositiveInteger(8);
  const res = await fetch(url, {
    method: 'POST',
    headers: { 'content-type': 'application/timestamp-query', accept: 'application/timestamp-reply' },
    body: new Uint8Array(buildTimeStampRequest(digest, nonce)),
    signal: AbortSignal.timeout(timeoutMs),
  }).catch((err: Error) => {
    throw new Error(`time-stamping authority ${url} cannot be reached: ${err.message}`, { cause: err });
  });
  if (!res.ok) throw new Error(`time-stamping authority ${url} answered HTTP ${res.status}`);
  const body = Buffer.from(await res.arrayBuffer());
  const resp = pkijs.TimeStampResp.fromBER(toArrayBuffer(body));
  if (resp.status.status !== 0 && resp.status.status !== 1) {
    throw new Error(`time-stamping authority ${url} refused the request (PKIStatus ${resp.status.status})`);
  }
  if (!resp.timeStampToken) throw new Error(`time-stamping authority ${url} granted but sent no token`);
  const token = Buffer.from(resp.timeStampToken.toSchema().toBER(false));
  const info = readTimeStampToken(token);
  if (!info.imprint.equals(digest)) throw new Error('the time-stamp token covers another digest than the one requested');
  if (!info.nonce || !info.nonce.equals(nonce)) throw new Error('the time-stamp token does not echo the nonce of the request');
  return token;
}

export interface TokenInfo {
  signedData: pkijs.SignedData;
  tstInfo: pkijs.TSTInfo;
  genTime: Date;
  imprint: Buffer;
  imprintAlgorithm: string;
  nonce?: Buffer;
  serialHex: string;
  policy: string;
}

/** Parses a token (RFC 3161 2.4.2) without checking it. */
export function readTimeStampToken(token: Uint8Array): TokenInfo {
  const asn = asn1js.fromBER(toArrayBuffer(token));
  if (asn.offset === -1) throw new Error('time-stamp token is not valid DER');
  const contentInfo = new pkijs.ContentInfo({ schema: asn.result });
  if (contentInfo.contentType !== OID.signedData) throw new Error('time-stamp token is not CMS SignedData');
  const signedData = new pkijs.SignedData({ schema: contentInfo.content });
  if (signedData.encapContentInfo.eContentType !== OID.tstInfo) throw new Error('time-stamp token does not hold a TSTInfo');
  const eContent = signedData.encapContentInfo.eContent;
  if (!eContent) throw new Error('time-stamp token has no TSTInfo content');
  const tstInfo = pkijs.TSTInfo.fromBER(toArrayBuffer(eContentBytes(eContent)));
  return {
    signedData,
    tstInfo,
    genTime: tstInfo.genTime,
    imprint: Buffer.from(tstInfo.messageImprint.hashedMessage.valueBlock.valueHexView),
    imprintAlgorithm: tstInfo.messageImprint.hashAlgorithm.algorithmId,
    nonce: tstInfo.nonce ? Buffer.from(tstInfo.nonce.valueBlock.valueHexView) : undefined,
    serialHex: Buffer.from(tstInfo.serialNumber.valueBlock.valueHexView).toString('hex'),
    policy: tstInfo.policy,
  };
}

/** eContent may be a primitive or a constructed (chunked) OCTET STRING. */
export function eContentBytes(eContent: asn1js.OctetString): Buffer {
  if (eContent.idBlock.isConstructed) {
    return Buffer.concat((eContent.valueBlock.value as asn1js.OctetString[]).map((c) => Buffer.from(c.valueBlock.valueHexView)));
  }
  return Buffer.from(eContent.valueBlock.valueHexView);
}

export interface CheckedToken extends TokenInfo {
  tsaCertificate: pkijs.Certificate;
  tsaRoot: pkijs.Certificate;
}

function hasTimeStampingPurpose(cert: pkijs.Certificate): boolean {
  const eku = cert.extensions?.find((e) => e.extnID === OID.extKeyUsage);
  if (!eku || !eku.critical) return false;
  const parsed = eku.parsedValue as pkijs.ExtKeyUsage | undefined;
  return !!parsed && parsed.keyPurposes.length === 1 && parsed.keyPurposes[0] === OID.kpTimeStamping;
}

/**
 * Checks a token against `imprint` (the SHA-256 it must cover) and a set of trusted TSA roots: the TSTInfo digest
 * matches, the signed messageDigest covers the TSTInfo, the TSA's signature verifies, the TSA certificate carries
 * the critical id-kp-timeStamping purpose (RFC 3161 2.3), was valid at genTime and chains to one of `roots`.
 * Throws with a reason when any of this fails.
 */
export async function checkTimeStampToken(token: Uint8Array, imprint: Buffer, roots: pkijs.Certificate[], extraCertificates: pkijs.Certificate[] = []): Promise<CheckedToken> {
  const info = readTimeStampToken(token);
  if (info.imprintAlgorithm !== OID.sha256) throw new Error(`time-stamp imprint uses ${info.imprintAlgorithm}, not SHA-256`);
  if (!info.imprint.equals(imprint)) throw new Error('time-stamp imprint does not match the data it should cover');
  const { signedData } = info;
  if (signedData.signerInfos.length !== 1) throw new Error('time-stamp token has more than one signer');
  const signerInfo = signedData.signerInfos[0];
  const sid = signerInfo.sid;
  const candidates = [...(signedData.certificates ?? []).filter((c): c is pkijs.Certificate => c instanceof pkijs.Certificate), ...extraCertificates];
  const tsaCertificate = candidates.find((c) => sid instanceof pkijs.IssuerAndSerialNumber && c.issuer.isEqual(sid.issuer) && c.serialNumber.isEqual(sid.serialNumber));
  if (!tsaCertificate) throw new Error('time-stamp token does not include the TSA certificate');
  if (!hasTimeStampingPurpose(tsaCertificate)) throw new Error('the TSA certificate lacks the critical id-kp-timeStamping purpose');
  const md = signerInfo.signedAttrs?.attributes.find((a) => a.type === OID.messageDigest)?.values[0];
  const eContent = signedData.encapContentInfo.eContent!;
  if (!(md instanceof asn1js.OctetString) || !Buffer.from(md.valueBlock.valueHexView).equals(sha256(eContentBytes(eContent)))) {
    throw new Error('time-stamp token signature does not cover its TSTInfo');
  }
  if (!signerInfoSignatureVerifies(signerInfo, tsaCertificate)) throw new Error('the TSA signature on the time-stamp token does not verify');
  const tsaPath = await chainToRoot(tsaCertificate, roots, candidates);
  if (!tsaPath) throw new Error('the TSA certificate does not chain to a trusted time-stamping root');
  const tsaRoot = tsaPath[tsaPath.length - 1];
  if (info.genTime < tsaCertificate.notBefore.value || info.genTime > tsaCertificate.notAfter.value) {
    throw new Error('the TSA certificate was not valid at the time in the token');
  }
  return { ...info, tsaCertificate, tsaRoot };
}

export function certificatesOfToken(token: Uint8Array): pkijs.Certificate[] {
  const { signedData } = readTimeStampToken(token);
  return (signedData.certificates ?? []).filter((c): c is pkijs.Certificate => c instanceof pkijs.Certificate).map((c) => parseCertificate(certificateDer(c)));
}
