import * as asn1js from 'asn1js';
import * as pkijs from 'pkijs';
import { signerInfoSignatureVerifies, signingCertificateV2Hash } from '../pki/cms';
import { certificateDer, chainToRoot, fingerprintSha256, nameToString, OID, parseCertificate, pemToDer, serialHex, sha256, toArrayBuffer } from '../pki/der';
import { checkTimeStampToken, type CheckedToken } from '../pki/tsp';
import { readAttachments, type ExtractedAttachment } from './attachments';
import { arrayRefs, dictRef, objectAt, objectBody, readStructure, refNumber, streamObject, type PdfStructure } from './incremental';

// Verifies a certificate PDF offline, from the file and the pinned trust anchors alone:
//  - layout (ISO 32000-1:2008 12.8.1): each /ByteRange covers the file up to its revision except its /Contents;
//  - the CAdES signature (ETSI EN 319 142-1 5.2, RFC 5652 5.4, RFC 5035): messageDigest, signing-certificate-v2,
//    the RSA signature, and the signer certificate issued by the pinned institute root;
//  - the signature time-stamp (RFC 3161 2.4.2) over the signature value, from a TSA chained to a trusted root;
//  - revocation at the time of the time-stamp from the CRLs in the DSS and the server's current CRL (RFC 5280 6.3);
//  - the DSS (B-LT) and the document time-stamp over everything (B-LTA), and that the update between the
//    signature and the document time-stamp changes nothing but what long-term validation adds.
// Files signed by the first releases (adbe.pkcs7.detached, the self-signed institute certificate pinned
// directly, no time-stamp) are recognised and reported as legacy signatures.

export type VerificationStatus = 'valid' | 'tampered' | 'unsigned';
export type SignatureLevel = 'legacy' | 'B-B' | 'B-T' | 'B-LT' | 'B-LTA';

export interface CertificateInfo {
  subject: string;
  issuer: string;
  serial: string;
  sha256: string;
  notBefore: string;
  notAfter: string;
}

export interface VerificationCheck {
  check: string;
  passed: boolean;
  /** What it was checked against. */
  against: string;
  detail?: string;
}

export interface SignatureReport {
  level: SignatureLevel;
  subFilter: string;
  claimedSigningTime: string | null;
  signer: CertificateInfo | null;
  chain: CertificateInfo[];
  timeStamp: { time: string; tsa: string; serial: string; policy: string } | null;
  documentTimeStamp: { time: string; tsa: string } | null;
  revocation: { status: 'good' | 'revoked' | 'revoked-after-signing' | 'unknown'; detail: string };
  dss: { certificates: number; crls: number } | null;
  checks: VerificationCheck[];
  attachments: Omit<ExtractedAttachment, 'data'>[];
}

export interface VerificationResult {
  status: VerificationStatus;
  reason?: string;
  signedDigestSha256?: string;
  /** The trusted time of signing (the time-stamp), or the claimed time for legacy files. */
  signingTime?: string;
  certificateNumber?: string;
  report?: SignatureReport;
}

export interface TrustAnchors {
  /** Institute root certificates (DER); a signing certificate must be issued by one of them. */
  instituteRoots: Buffer[];
  /** Trusted time-stamping roots (DER). */
  tsaRoots: Buffer[];
  /** The first releases' self-signed institute certificate, when this installation has one. */
  legacyCertificatePem?: string;
  /** The server's newest CRL (DER): catches a key withdrawn after the file was made. */
  currentCrl?: Buffer;
}

const BYTE_RANGE = /\/ByteRange\s*\[\s*(\d+)\s+(\d+)\s+(\d+)\s+(\d+)\s*\]/g;

function isWhitespace(byte: number): boolean {
  return byte === 0x20 || byte === 0x0a || byte === 0x0d || byte === 0x09 || byte === 0x0c || byte === 0x00;
}

function isHexDigit(byte: number): boolean {
  return (byte >= 0x30 && byte <= 0x39) || (byte >= 0x41 && byte <= 0x46) || (byte >= 0x61 && byte <= 0x66);
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

function attributeValue(attrs: pkijs.SignedAndUnsignedAttributes | undefined, oid: string): asn1js.AsnType | undefined {
  return attrs?.attributes.find((a) => a.type === oid)?.values[0];
}

function info(cert: pkijs.Certificate): CertificateInfo {
  return {
    subject: nameToString(cert.subject), issuer: nameToString(cert.issuer), serial: serialHex(cert),
    sha256: fingerprintSha256(certificateDer(cert)), notBefore: cert.notBefore.value.toISOString(), notAfter: cert.notAfter.value.toISOString(),
  };
}

interface SignatureField {
  range: [number, number, number, number];
  subFilter: string;
  claimedTime: string | null;
  contents: Buffer;
  signedBytes: Buffer;
}

class Tampered extends Error {}

/** Checks one /ByteRange the way a conforming reader does and returns the signed bytes and the /Contents. */
function readSignatureField(pdf: Buffer, text: string, match: RegExpMatchArray, revisionEnd: number): SignatureField {
  const [a, b, c, d] = match.slice(1, 5).map(Number) as [number, number, number, number];
  if (a !== 0) throw new Tampered('signed byte range does not start at the beginning of the file');
  if (!(b > 0 && c > b + 1 && c + d === revisionEnd)) {
    if (!(b > 0 && c > b + 1) || c + d > revisionEnd) throw new Tampered('signed byte range does not match the file length');
    // The file is longer than what was signed. If the signature gap still sits where the byte range says, the extra
    // bytes follow the signed range (an incremental update); otherwise they were put in before the signature.
    const extra = revisionEnd - (c + d);
    throw new Tampered(
      pdf[b] === 0x3c && pdf[c - 1] === 0x3e
        ? `bytes after the signed range: ${extra} bytes were appended (incremental update) after signing`
        : `${extra} bytes were put into the file before the signature, or bytes inside it were changed, after signing (the signed byte range no longer lines up with the file)`,
    );
  }
  if (pdf[b] !== 0x3c || pdf[c - 1] !== 0x3e) throw new Tampered('the gap in the signed byte range is not a hex string');
  for (let i = b + 1; i < c - 1; i++) if (!isHexDigit(pdf[i])) throw new Tampered('the gap in the signed byte range holds more than the signature');
  let k = b - 1;
  while (k >= 0 && isWhitespace(pdf[k])) k--;
  if (pdf.subarray(Math.max(0, k - 8), k + 1).toString('latin1') !== '/Contents') throw new Tampered('the gap in the signed byte range is not the signature /Contents');
  // The dictionary around this /ByteRange: from the `obj` before it to the `endobj` after it.
  const objStart = text.lastIndexOf(' obj', match.index!);
  const objEnd = text.indexOf('endobj', match.index!);
  const dict = text.slice(objStart, objEnd);
  const subFilter = /\/SubFilter\s*\/([\w.]+)/.exec(dict)?.[1] ?? '';
  const m = /\/M\s*\(D:(\d{4})(\d{2})(\d{2})(\d{2})(\d{2})(\d{2})/.exec(dict);
  const claimedTime = m ? new Date(Date.UTC(+m[1], +m[2] - 1, +m[3], +m[4], +m[5], +m[6])).toISOString() : null;
  const hex = pdf.subarray(b + 1, c - 1).toString('latin1');
  const contents = Buffer.from(hex, 'hex');
  const signedBytes = Buffer.concat([pdf.subarray(0, b), pdf.subarray(c, c + d)]);
  return { range: [a, b, c, d], subFilter, claimedTime, contents, signedBytes };
}

function parseCms(contents: Buffer): pkijs.SignedData {
  const asn = asn1js.fromBER(toArrayBuffer(contents));
  if (asn.offset === -1) throw new Tampered('signature is not valid DER/BER');
  if (contents.subarray(asn.offset).some((byte) => byte !== 0)) throw new Tampered('data after the CMS signature in /Contents');
  try {
    const contentInfo = new pkijs.ContentInfo({ schema: asn.result });
    if (contentInfo.contentType !== OID.signedData) throw new Tampered('signature is not CMS SignedData');
    const signedData = new pkijs.SignedData({ schema: contentInfo.content });
    if (signedData.signerInfos.length !== 1) throw new Tampered(`expected one signer, found ${signedData.signerInfos.length}`);
    return signedData;
  } catch (err) {
    if (err instanceof Tampered) throw err;
    throw new Tampered(`signature cannot be parsed as CMS: ${(err as Error).message}`);
  }
}

function tokenBytes(contents: Buffer): Buffer {
  const asn = asn1js.fromBER(toArrayBuffer(contents));
  if (asn.offset === -1) throw new Tampered('document time-stamp is not valid DER');
  return contents.subarray(0, asn.offset);
}

function findSigner(signedData: pkijs.SignedData): pkijs.Certificate | undefined {
  const sid = signedData.signerInfos[0].sid;
  return (signedData.certificates ?? []).find(
    (item): item is pkijs.Certificate => item instanceof pkijs.Certificate && sid instanceof pkijs.IssuerAndSerialNumber && item.issuer.isEqual(sid.issuer) && item.serialNumber.isEqual(sid.serialNumber),
  );
}

function messageDigestMatches(signerInfo: pkijs.SignerInfo, digest: Buffer): boolean {
  const md = attributeValue(signerInfo.signedAttrs, OID.messageDigest);
  return md instanceof asn1js.OctetString && Buffer.from(md.valueBlock.valueHexView).equals(digest);
}

// --- legacy ------------------------------------------------------------------------------------------------

async function verifyLegacy(field: SignatureField, anchors: TrustAnchors, base: Partial<VerificationResult>): Promise<VerificationResult> {
  const digest = sha256(field.signedBytes);
  const signedDigestSha256 = digest.toString('hex');
  const signedData = parseCms(field.contents);
  const signerInfo = signedData.signerInfos[0];
  const t = attributeValue(signerInfo.signedAttrs, OID.signingTime);
  const signingTime = t instanceof asn1js.UTCTime || t instanceof asn1js.GeneralizedTime ? t.toDate().toISOString() : undefined;
  const fail = (reason: string): VerificationResult => ({ ...base, status: 'tampered', reason, signedDigestSha256, ...(signingTime ? { signingTime } : {}) });
  if (signerInfo.digestAlgorithm.algorithmId !== OID.sha256) return fail(`unsupported digest algorithm ${signerInfo.digestAlgorithm.algorithmId}`);
  if (!messageDigestMatches(signerInfo, digest)) return fail('messageDigest in the signature does not match the file: the signed bytes were changed');
  if (!anchors.legacyCertificatePem) return fail('a legacy signature (self-signed institute key), but this installation holds no legacy institute certificate to check it against');
  const pinned = parseCertificate(pemToDer(anchors.legacyCertificatePem));
  const signer = findSigner(signedData);
  if (!signer) return fail('the signer certificate is not included in the signature');
  if (!certificateDer(signer).equals(certificateDer(pinned))) return fail('signed with a certificate other than the pinned institute certificate');
  if (!signerInfoSignatureVerifies(signerInfo, pinned)) return fail('signature does not verify with the pinned certificate');
  const report: SignatureReport = {
    level: 'legacy', subFilter: field.subFilter, claimedSigningTime: signingTime ?? field.claimedTime, signer: info(pinned), chain: [info(pinned)],
    timeStamp: null, documentTimeStamp: null, revocation: { status: 'unknown', detail: 'legacy signature: the self-signed institute certificate has no revocation service' },
    dss: null, attachments: [],
    checks: [
      { check: 'signed bytes unchanged (messageDigest)', passed: true, against: 'SHA-256 of the /ByteRange' },
      { check: 'signature by the pinned legacy institute certificate', passed: true, against: `pinned certificate SHA-256 ${info(pinned).sha256}` },
      { check: 'trusted time of signing', passed: false, against: 'none: legacy signatures carry no time-stamp; the time shown is the one the signer claimed' },
    ],
  };
  return { ...base, status: 'valid', signedDigestSha256, ...(signingTime ? { signingTime } : {}), report };
}

// --- PAdES ------------------------------------------------------------------------------------------------

interface CrlView {
  crl: pkijs.CertificateRevocationList;
  thisUpdate: Date;
}

async function crlsIssuedBy(ders: Buffer[], issuer: pkijs.Certificate): Promise<CrlView[]> {
  const out: CrlView[] = [];
  for (const der of ders) {
    try {
      const crl = pkijs.CertificateRevocationList.fromBER(toArrayBuffer(der));
      if (!crl.issuer.isEqual(issuer.subject)) continue;
      const signed = await crl.verify({ issuerCertificate: issuer }).catch(() => false);
      if (signed) out.push({ crl, thisUpdate: crl.thisUpdate.value });
    } catch {
      // not a CRL we can read: ignored, and the status stays unknown if no other CRL speaks
    }
  }
  return out;
}

function revocationOf(crl: pkijs.CertificateRevocationList, serial: string): { at: Date; invalidity?: Date } | undefined {
  const entry = (crl.revokedCertificates ?? []).find((r) => Buffer.from(r.userCertificate.valueBlock.valueHexView).toString('hex') === serial);
  if (!entry) return undefined;
  const inv = entry.crlEntryExtensions?.extensions.find((e) => e.extnID === OID.invalidityDate);
  const invDate = inv ? (asn1js.fromBER(inv.extnValue.valueBlock.valueHexView).result as asn1js.GeneralizedTime).toDate() : undefined;
  return { at: entry.revocationDate.value, ...(invDate ? { invalidity: invDate } : {}) };
}

function hasKeyUsage(cert: pkijs.Certificate): boolean {
  const ku = cert.extensions?.find((e) => e.extnID === OID.keyUsage);
  if (!ku) return false;
  const bits = (asn1js.fromBER(ku.extnValue.valueBlock.valueHexView).result as asn1js.BitString).valueBlock.valueHexView;
  // digitalSignature (bit 0) or nonRepudiation (bit 1), RFC 5280 4.2.1.3.
  return bits.length > 0 && (bits[0] & 0xc0) !== 0;
}

function readDss(pdf: Buffer, structure: PdfStructure): { certs: Buffer[]; crls: Buffer[] } | null {
  const catalog = objectBody(pdf, structure, refNumber(structure.rootRef));
  const dssRef = dictRef(catalog, 'DSS');
  if (dssRef === undefined) return null;
  const dss = objectBody(pdf, structure, dssRef);
  return {
    certs: arrayRefs(dss, 'Certs').map((n) => streamObject(pdf, structure, n).data),
    crls: arrayRefs(dss, 'CRLs').map((n) => streamObject(pdf, structure, n).data),
  };
}

/** Removes the entries long-term validation may add, so the rest of a dictionary can be compared. */
function withoutLtvEntries(dict: string, keys: string[]): string {
  let out = dict;
  for (const key of keys) {
    out = out.replace(new RegExp(`/${key}\\s*(\\d+\\s+\\d+\\s+R|\\[[^\\]]*\\]|<<(?:[^<>]|<<[^<>]*>>)*>>)`), '');
  }
  return out.replace(/\s+/g, ' ').trim();
}

/**
 * The update between the signature and the document time-stamp may add new objects, and change only the
 * catalogue (/DSS, /Extensions), the AcroForm (/Fields) and one page (/Annots); anything else would alter
 * what was signed and is reported.
 */
function checkLtvUpdate(pdf: Buffer, signedEnd: number): void {
  const before = readStructure(pdf.subarray(0, signedEnd));
  const after = readStructure(pdf);
  if (after.rootRef !== before.rootRef) throw new Tampered('the update after signing replaced the document catalogue');
  if (after.infoRef !== before.infoRef) throw new Tampered('the update after signing replaced the document information');
  const rootNumber = refNumber(before.rootRef);
  // Every object a reader now takes from after the signed revision, whichever update (there may be several) put it there.
  for (const [num, offset] of after.offsets) {
    if (offset < signedEnd || !before.offsets.has(num)) continue;
    const old = objectBody(pdf, before, num);
    const now = objectAt(pdf, offset).body;
    const allowed = num === rootNumber ? ['DSS', 'Extensions'] : /\/Type\s*\/AcroForm/.test(old) ? ['Fields'] : /\/Type\s*\/Page\b/.test(old) ? ['Annots'] : null;
    if (!allowed || withoutLtvEntries(old, allowed) !== withoutLtvEntries(now, allowed)) {
      throw new Tampered(`the update after signing changes object ${num}, which long-term validation data never touches`);
    }
    // What may be added to /Annots and /Fields: invisible signature widgets (the document time-stamp's field).
    for (const key of ['Annots', 'Fields']) {
      const kept = new Set(arrayRefs(old, key));
      for (const added of arrayRefs(now, key).filter((r) => !kept.has(r))) {
        const widget = objectBody(pdf, after, added);
        if (!/\/Subtype\s*\/Widget/.test(widget) || !/\/FT\s*\/Sig/.test(widget) || !/\/Rect\s*\[\s*0\s+0\s+0\s+0\s*\]/.test(widget)) {
          throw new Tampered(`the update after signing adds object ${added} to the page or form, which is not an invisible signature field`);
        }
      }
    }
  }
}

async function verifyPades(pdf: Buffer, main: SignatureField, docTs: SignatureField | null, anchors: TrustAnchors, base: Partial<VerificationResult>): Promise<VerificationResult> {
  const checks: VerificationCheck[] = [];
  const digest = sha256(main.signedBytes);
  const signedDigestSha256 = digest.toString('hex');
  let signingTime: string | undefined;
  const fail = (reason: string): VerificationResult => ({ ...base, status: 'tampered', reason, signedDigestSha256, ...(signingTime ? { signingTime } : {}) });
  const roots = anchors.instituteRoots.map(parseCertificate);
  const tsaRoots = anchors.tsaRoots.map(parseCertificate);

  const signedData = parseCms(main.contents);
  const signerInfo = signedData.signerInfos[0];
  if (signerInfo.digestAlgorithm.algorithmId !== OID.sha256) return fail(`unsupported digest algorithm ${signerInfo.digestAlgorithm.algorithmId}`);
  if (!messageDigestMatches(signerInfo, digest)) return fail('messageDigest in the signature does not match the file: the signed bytes were changed');
  checks.push({ check: 'signed bytes unchanged (CMS messageDigest)', passed: true, against: 'SHA-256 of the bytes the /ByteRange covers' });
  const signer = findSigner(signedData);
  if (!signer) return fail('the signer certificate is not included in the signature');
  const essHash = signingCertificateV2Hash(signerInfo);
  if (!essHash || !essHash.equals(sha256(certificateDer(signer)))) return fail('the signing-certificate-v2 attribute does not name the signer certificate');
  checks.push({ check: 'signer certificate bound by signing-certificate-v2', passed: true, against: 'SHA-256 of the signer certificate (RFC 5035)' });
  if (!signerInfoSignatureVerifies(signerInfo, signer)) return fail('the signature does not verify with the signer certificate');
  checks.push({ check: 'RSA signature over the signed attributes', passed: true, against: 'public key of the signer certificate' });
  const cmsCertificates = (signedData.certificates ?? []).filter((c): c is pkijs.Certificate => c instanceof pkijs.Certificate);
  const structure = readStructure(pdf);
  const dss = readDss(pdf, structure);
  const dssCerts = (dss?.certs ?? []).flatMap((c) => {
    try {
      return [parseCertificate(c)];
    } catch {
      return [];
    }
  });
  const path = await chainToRoot(signer, roots, [...cmsCertificates, ...dssCerts]);
  const root = path?.[path.length - 1];
  if (!path || !root || path.length < 2) {
    return anchors.instituteRoots.length
      ? fail('the signer certificate was not issued by the pinned institute root CA')
      : fail('this installation has no institute root CA to check the signature against');
  }
  checks.push({ check: `signer certificate chains to the institute root CA (${path.length - 1} step${path.length > 2 ? 's' : ''})`, passed: true, against: `pinned root SHA-256 ${fingerprintSha256(certificateDer(root))}` });
  if (!hasKeyUsage(signer)) return fail('the signer certificate is not meant for signatures (key usage)');

  // Signature time-stamp.
  const tokenValue = attributeValue(signerInfo.unsignedAttrs, OID.signatureTimeStampToken);
  let token: CheckedToken | null = null;
  if (tokenValue) {
    try {
      token = await checkTimeStampToken(Buffer.from(tokenValue.toBER(false)), sha256(Buffer.from(signerInfo.signature.valueBlock.valueHexView)), tsaRoots, dssCerts);
    } catch (err) {
      return fail(`signature time-stamp: ${(err as Error).message}`);
    }
    signingTime = token.genTime.toISOString();
    checks.push({ check: 'signature time-stamp (RFC 3161) covers the signature value', passed: true, against: `TSA root SHA-256 ${fingerprintSha256(certificateDer(token.tsaRoot))}` });
  }
  const at = token?.genTime ?? (main.claimedTime ? new Date(main.claimedTime) : new Date());
  if (at < signer.notBefore.value || at > signer.notAfter.value) return fail(`the signer certificate was not valid at ${at.toISOString()}`);
  checks.push({ check: 'signer certificate valid at the time of signing', passed: true, against: token ? 'time-stamp genTime' : 'claimed signing time (no time-stamp)' });

  // Revocation: the CRLs in the DSS say what was known when the file was made, the server's current CRL
  // what is known now; a withdrawal (or its invalidity date) at or before the time-stamp breaks the signature.
  const serial = serialHex(signer);
  // The CRL that speaks for the signing certificate is its issuer's (the root, or an intermediate CA).
  const issuer = path[1];
  const dssCrls = dss ? await crlsIssuedBy(dss.crls, issuer) : [];
  const currentCrls = anchors.currentCrl ? await crlsIssuedBy([anchors.currentCrl], issuer) : [];
  let revocation: SignatureReport['revocation'] = { status: 'unknown', detail: "no CRL of the signing certificate's issuer was found in the file or on this server" };
  for (const { crl } of [...dssCrls, ...currentCrls]) {
    const r = revocationOf(crl, serial);
    if (!r) continue;
    const effective = r.invalidity && r.invalidity < r.at ? r.invalidity : r.at;
    if (effective <= at) return fail(`the signing key was withdrawn (compromise) from ${effective.toISOString()}, before this signature's time ${at.toISOString()}`);
    revocation = { status: 'revoked-after-signing', detail: `the signing key was withdrawn from ${effective.toISOString()}, after this signature was time-stamped; the signature stands` };
  }
  if (revocation.status === 'unknown') {
    const fresh = [...dssCrls, ...currentCrls].filter((c) => c.thisUpdate >= new Date(at.getTime() - 1000));
    if (fresh.length) revocation = { status: 'good', detail: `not listed in the institute CRL issued ${fresh[0].thisUpdate.toISOString()}${currentCrls.length ? ' nor in this server\'s current CRL' : ''}` };
  }
  checks.push({ check: 'signing key not withdrawn at the time of signing', passed: revocation.status !== 'unknown', against: "CRLs of the signing certificate's issuer (in the file's DSS and this server's current CRL)" });

  if (token && dss) {
    const tsaCrls = await crlsIssuedBy(dss.crls, token.tsaRoot);
    const tsaRevoked = tsaCrls.some(({ crl }) => revocationOf(crl, serialHex(token.tsaCertificate)) !== undefined);
    if (tsaRevoked) return fail('the TSA certificate is listed as revoked in the CRL of its root');
    checks.push({ check: 'TSA certificate not revoked', passed: tsaCrls.length > 0, against: tsaCrls.length ? 'CRL of the TSA root in the DSS' : 'no CRL of the TSA root in the DSS' });
  }

  // Document time-stamp (B-LTA).
  let documentTimeStamp: SignatureReport['documentTimeStamp'] = null;
  if (docTs) {
    try {
      checkLtvUpdate(pdf, main.range[2] + main.range[3]);
      const dts = await checkTimeStampToken(tokenBytes(docTs.contents), sha256(docTs.signedBytes), tsaRoots, dssCerts);
      documentTimeStamp = { time: dts.genTime.toISOString(), tsa: nameToString(dts.tsaCertificate.subject) };
    } catch (err) {
      return fail(`document time-stamp: ${(err as Error).message}`);
    }
    checks.push({ check: 'document time-stamp covers the whole file, DSS included', passed: true, against: 'trusted TSA roots' });
    checks.push({ check: 'the update after signing only adds validation data', passed: true, against: 'the signed revision (catalogue, AcroForm and page compared entry by entry)' });
  }

  const chainOk = dss && path.every((c) => dss.certs.some((d) => d.equals(certificateDer(c)))) && dssCrls.length > 0;
  const level: SignatureLevel = !token ? 'B-B' : !chainOk ? 'B-T' : documentTimeStamp ? 'B-LTA' : 'B-LT';
  if (dss) checks.push({ check: 'DSS holds the chain and a CRL of the root (long-term validation data)', passed: !!chainOk, against: 'the signer certificate and the pinned root' });

  let attachments: Omit<ExtractedAttachment, 'data'>[] = [];
  try {
    attachments = readAttachments(pdf.subarray(0, main.range[2] + main.range[3])).map(({ data: _d, ...rest }) => rest);
    checks.push({ check: 'embedded files are inside the signed revision', passed: true, against: 'the /ByteRange of the signature' });
  } catch (err) {
    checks.push({ check: 'embedded files readable', passed: false, against: 'the signed revision', detail: (err as Error).message });
  }

  const report: SignatureReport = {
    level, subFilter: main.subFilter, claimedSigningTime: main.claimedTime, signer: info(signer), chain: path.map(info),
    timeStamp: token ? { time: token.genTime.toISOString(), tsa: nameToString(token.tsaCertificate.subject), serial: token.serialHex, policy: token.policy } : null,
    documentTimeStamp, revocation, dss: dss ? { certificates: dss.certs.length, crls: dss.crls.length } : null, checks, attachments,
  };
  return { ...base, status: 'valid', signedDigestSha256, ...(signingTime ? { signingTime } : {}), report };
}

export async function verifySignedPdf(pdf: Buffer, anchors: TrustAnchors): Promise<VerificationResult> {
  const text = pdf.toString('latin1');
  const certificateNumber = findCertificateNumber(text);
  const base: Partial<VerificationResult> = certificateNumber ? { certificateNumber } : {};
  const ranges = [...text.matchAll(BYTE_RANGE)];
  if (ranges.length === 0) {
    const reason = /\/ByteRange\s*\[/.test(text) ? 'signature placeholder was never filled' : 'no signature dictionary found';
    return { ...base, status: 'unsigned', reason };
  }
  if (ranges.length > 2) return { ...base, status: 'tampered', reason: `${ranges.length} signatures found; a certificate carries one signature and at most one document time-stamp` };
  try {
    if (ranges.length === 1) {
      const field = readSignatureField(pdf, text, ranges[0], pdf.length);
      if (field.subFilter === 'adbe.pkcs7.detached') return await verifyLegacy(field, anchors, base);
      if (field.subFilter !== 'ETSI.CAdES.detached') return { ...base, status: 'tampered', reason: `unexpected signature type ${field.subFilter || '(none)'}` };
      return await verifyPades(pdf, field, null, anchors, base);
    }
    const firstEnd = Number(ranges[0][3]) + Number(ranges[0][4]);
    const main = readSignatureField(pdf, text, ranges[0], firstEnd <= pdf.length ? firstEnd : pdf.length);
    const docTs = readSignatureField(pdf, text, ranges[1], pdf.length);
    if (main.subFilter !== 'ETSI.CAdES.detached') return { ...base, status: 'tampered', reason: `unexpected first signature type ${main.subFilter || '(none)'}` };
    if (docTs.subFilter !== 'ETSI.RFC3161') return { ...base, status: 'tampered', reason: `a second signature (${docTs.subFilter || 'no type'}) was added; only a document time-stamp may follow` };
    return await verifyPades(pdf, main, docTs, anchors, base);
  } catch (err) {
    if (err instanceof Tampered) return { ...base, status: 'tampered', reason: err.message };
    return { ...base, status: 'tampered', reason: `the file cannot be read as a signed certificate: ${(err as Error).message}` };
  }
}
