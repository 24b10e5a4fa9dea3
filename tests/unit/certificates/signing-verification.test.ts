import { execFileSync, spawnSync } from 'node:child_process';
import { mkdirSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import * as asn1js from 'asn1js';
import * as pkijs from 'pkijs';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import forge from 'node-forge';
import { appendIncrementalUpdate, appendToArray, arrayRefs, dictRef, objectBody, readStructure, refNumber } from '../../../server/certificates/pdf/incremental';
import { addLongTermValidation, signPades, type PadesMaterial } from '../../../server/certificates/pdf/pades';
import { renderCertificatePdf } from '../../../server/certificates/pdf/render-certificate';
import { ensureInstituteSigningIdentity, signPdf } from '../../../server/certificates/pdf/signing';
import { verifySignedPdf, type TrustAnchors } from '../../../server/certificates/pdf/verify-pdf';
import { addSignatureTimeStamp, signedDataToDer } from '../../../server/certificates/pki/cms';
import { OID, pemToDer, sha256, toArrayBuffer } from '../../../server/certificates/pki/der';
import { requestTimeStamp } from '../../../server/certificates/pki/tsp';
import { createCertificate, createCrl, type KeyAndCertificate } from '../../../server/certificates/pki/x509';
import { startFakeTsa } from '../../../server/dev/fake-tsa';
import { longSnapshot, sampleSnapshot } from './fixtures/sample-snapshot';

// Signature rules checked here: ISO 32000-1:2008 12.8.1 (/ByteRange covers the file except /Contents),
// RFC 5652 5.4 and 11.2 (messageDigest, signature over the signed attributes), RFC 5035 (signing-certificate-v2),
// RFC 3161 2.4.2 (time-stamp imprint), RFC 5280 6.3 (CRL status), ETSI EN 319 142-1 (PAdES B-T/B-LT/B-LTA).
// External checkers, each named beside its check: Debian poppler-utils (pdfsig, pdfdetach), OpenSSL (ts -verify,
// cms -verify, crl) and NSS certutil (libnss3-tools) to give pdfsig the institute root as a trust anchor.

const has = (cmd: string, arg = '-v') => spawnSync(cmd, [arg]).error === undefined;
const hasPdfsig = has('pdfsig');
const hasOpenssl = has('openssl', 'version');
const hasCertutil = spawnSync('certutil', ['-H']).error === undefined;

const workDir = mkdtempSync(path.join(tmpdir(), 'chronolevel-cert-'));
const claimedTime = new Date('2025-06-18T09:45:00Z');
const signOptions = { reason: 'Certificate CL-2025-00042-r1', location: 'Meridian Geodetic Institute', name: 'Dr. Ilse Varga', signingTime: claimedTime };
const institute = { commonName: 'Meridian Geodetic Institute', organization: 'Meridian Geodetic Institute' };

let tsa: Awaited<ReturnType<typeof startFakeTsa>>;
let foreignTsa: Awaited<ReturnType<typeof startFakeTsa>>;
let root: KeyAndCertificate;
let leaf: KeyAndCertificate;
let anchors: TrustAnchors;
let unsigned: Buffer;
let signed: Buffer;
let otherSigned: Buffer;

function materialFor(signer: KeyAndCertificate, issuer: KeyAndCertificate, tsaUrl: string, tsaRootPem: string): PadesMaterial {
  return {
    signer: { keyPem: signer.keyPem, certificate: pemToDer(signer.certPem), chain: [pemToDer(issuer.certPem)] },
    tsaUrl,
    validationData: async (tsaCerts) => ({
      certificates: [pemToDer(signer.certPem), pemToDer(issuer.certPem), ...tsaCerts, pemToDer(tsaRootPem)],
      crls: [
        await createCrl({ issuer, crlNumber: 1, thisUpdate: new Date(), validityDays: 7, revoked: [] }),
        Buffer.from(await (await fetch(`${tsaUrl}/crl`)).arrayBuffer()),
      ],
    }),
  };
}

function ranges(pdf: Buffer): [number, number, number, number][] {
  return [...pdf.toString('latin1').matchAll(/\/ByteRange\s*\[\s*(\d+)\s+(\d+)\s+(\d+)\s+(\d+)\s*\]/g)].map((m) => [Number(m[1]), Number(m[2]), Number(m[3]), Number(m[4])]);
}

function flipped(pdf: Buffer, offset: number): Buffer {
  const copy = Buffer.from(pdf);
  copy[offset] ^= 0x01;
  return copy;
}

function mainCms(pdf: Buffer): pkijs.SignedData {
  const [, b, c] = ranges(pdf)[0];
  const der = Buffer.from(pdf.subarray(b + 1, c - 1).toString('latin1'), 'hex');
  const asn = asn1js.fromBER(toArrayBuffer(der));
  return new pkijs.SignedData({ schema: new pkijs.ContentInfo({ schema: asn.result }).content });
}

function signatureTimeStampToken(signedData: pkijs.SignedData): Buffer {
  const attr = signedData.signerInfos[0].unsignedAttrs!.attributes.find((a) => a.type === OID.signatureTimeStampToken)!;
  return Buffer.from(attr.values[0].toBER(false));
}

/** Puts another CMS blob into the first signature's /Contents, padded to the same length. */
function withMainContents(pdf: Buffer, der: Buffer): Buffer {
  const [, b, c] = ranges(pdf)[0];
  const hex = der.toString('hex').padEnd(c - b - 2, '0');
  return Buffer.concat([pdf.subarray(0, b + 1), Buffer.from(hex, 'latin1'), pdf.subarray(c - 1)]);
}

/** A genuine incremental update (ISO 32000-1 7.5.6): a new Info dictionary, xref section and trailer with /Prev. */
function appendInfoUpdate(pdf: Buffer, title: string): Buffer {
  const text = pdf.toString('latin1');
  const prevAt = text.lastIndexOf('startxref');
  let prev = Number(/startxref\s+(\d+)/.exec(text.slice(prevAt))![1]);
  while (text[prev] === '\n') prev++;
  const root = [...text.matchAll(/\/Root\s+(\d+\s+\d+\s+R)/g)].at(-1)![1];
  const size = Math.max(...[...text.matchAll(/\/Size\s+(\d+)/g)].map((m) => Number(m[1])));
  const objectOffset = pdf.length + 1;
  const body = `\n${size} 0 obj\n<< /Title (${title}) /CertificateNumber (CL-2025-00042-r1) >>\nendobj\n`;
  const xrefOffset = pdf.length + Buffer.byteLength(body, 'latin1');
  const tail = `xref\n${size} 1\n${String(objectOffset).padStart(10, '0')} 00000 n \ntrailer\n<< /Size ${size + 1} /Root ${root} /Info ${size} 0 R /Prev ${prev} >>\nstartxref\n${xrefOffset}\n%%EOF`;
  return Buffer.concat([pdf, Buffer.from(body + tail, 'latin1')]);
}

beforeAll(async () => {
  tsa = await startFakeTsa({ port: 0, keysDir: path.join(workDir, 'tsa') });
  foreignTsa = await startFakeTsa({ port: 0, keysDir: path.join(workDir, 'foreign-tsa') });
  root = createCertificate({ subject: { ...institute, commonName: `${institute.commonName} Root CA` }, profile: { kind: 'root-ca' }, validityYears: 30 });
  leaf = createCertificate({ subject: { ...institute, commonName: `${institute.commonName} certificate signing` }, profile: { kind: 'document-signing', crlUrl: 'http://127.0.0.1:9/crl' }, issuer: root });
  anchors = { instituteRoots: [pemToDer(root.certPem)], tsaRoots: [pemToDer(tsa.rootCertPem)] };
  unsigned = await renderCertificatePdf(sampleSnapshot());
  const material = materialFor(leaf, root, tsa.url, tsa.rootCertPem);
  signed = await signPades(unsigned, material, signOptions);
  otherSigned = await signPades(await renderCertificatePdf(longSnapshot()), material, signOptions);
  writeFileSync(path.join(workDir, 'root.pem'), root.certPem);
}, 120_000);

afterAll(async () => {
  await tsa?.close();
  await foreignTsa?.close();
  rmSync(workDir, { recursive: true, force: true });
});

describe('PAdES signature (B-LTA)', () => {
  it('verifies the untouched file at level B-LTA, with the trusted time from the time-stamp', async () => {
    const result = await verifySignedPdf(signed, anchors);
    expect(result.reason).toBeUndefined();
    expect(result.status).toBe('valid');
    expect(result.certificateNumber).toBe('CL-2025-00042-r1');
    const report = result.report!;
    expect(report.level).toBe('B-LTA');
    expect(report.subFilter).toBe('ETSI.CAdES.detached');
    // The claimed /M stays 2025; the trusted time is the TSA's, i.e. now.
    expect(report.claimedSigningTime).toBe(claimedTime.toISOString());
    expect(Math.abs(Date.parse(result.signingTime!) - Date.now())).toBeLessThan(10 * 60_000);
    expect(report.chain.map((c) => c.subject)).toEqual([`CN=${institute.commonName} certificate signing, O=${institute.organization}`, `CN=${institute.commonName} Root CA, O=${institute.organization}`]);
    expect(report.revocation.status).toBe('good');
    expect(report.documentTimeStamp).not.toBeNull();
    expect(report.checks.every((c) => c.passed)).toBe(true);
    expect(report.attachments.map((a) => [a.name, a.relationship, a.mime])).toEqual([
      ['CL-2025-00042-r1.result.csv', 'Data', 'text/csv'],
      ['CL-2025-00042-r1.snapshot.json', 'Source', 'application/json'],
    ]);
    // The digest covers exactly the two byte ranges of the first signature, recomputed here with node-forge.
    const [[a, b, c, d]] = ranges(signed);
    const md = forge.md.sha256.create();
    md.update(Buffer.concat([signed.subarray(a, a + b), signed.subarray(c, c + d)]).toString('binary'));
    expect(result.signedDigestSha256).toBe(md.digest().toHex());
  });

  it('carries the CAdES attributes ETSI EN 319 142-1 5.2 asks for, and no signing-time attribute', () => {
    const signerInfo = mainCms(signed).signerInfos[0];
    const types = signerInfo.signedAttrs!.attributes.map((x) => x.type);
    expect(types).toEqual(expect.arrayContaining([OID.contentType, OID.messageDigest, OID.signingCertificateV2]));
    expect(types).not.toContain(OID.signingTime);
    expect(signerInfo.unsignedAttrs!.attributes.map((x) => x.type)).toEqual([OID.signatureTimeStampToken]);
  });

  it('reports an unsigned PDF as unsigned', async () => {
    const result = await verifySignedPdf(unsigned, anchors);
    expect(result.status).toBe('unsigned');
    expect(result.certificateNumber).toBe('CL-2025-00042-r1');
  });

  it('reports a flipped byte in the signed revision, in the DSS or in the document time-stamp as tampered', async () => {
    const [[, b, c, d], [, tb, tc]] = ranges(signed);
    const text = signed.toString('latin1');
    const dssAt = text.indexOf('/Type /DSS');
    const positions = {
      'first byte of the file': 0,
      'middle of the signed revision': Math.floor(b / 2),
      'certificate number string': text.indexOf('(CL-2025-00042-r1)') + 10,
      'just after the signature': c,
      'end of the signed revision': c + d - 3,
      'DSS dictionary (DSS altered)': dssAt + 3,
      'a certificate stream in the DSS': dssAt - 400,
      'just before the document time-stamp': tb - 1,
      'near the end of the file': signed.length - 8,
    };
    for (const [where, offset] of Object.entries(positions)) {
      expect(offset, where).toBeGreaterThan(-1);
      const result = await verifySignedPdf(flipped(signed, offset), anchors);
      expect(result.status, where).toBe('tampered');
      expect(result.reason, where).toBeTruthy();
    }
    expect(tc).toBeLessThan(signed.length);
  });

  it('reports a changed embedded file (attachment changed) as tampered', async () => {
    const text = signed.toString('latin1');
    const csvAt = text.indexOf('/Subtype /text#2fcsv') !== -1 ? text.indexOf('/Subtype /text#2fcsv') : text.indexOf('/Subtype /text#2Fcsv');
    expect(csvAt).toBeGreaterThan(0);
    const streamAt = text.indexOf('stream', csvAt) + 12;
    const result = await verifySignedPdf(flipped(signed, streamAt), anchors);
    expect(result.status).toBe('tampered');
    expect(result.reason).toMatch(/messageDigest/);
  });

  it('reports a replaced signature time-stamp token (token replaced) as tampered', async () => {
    const cms = mainCms(signed);
    // A genuine token from the trusted TSA, but over other data: its imprint cannot match the signature value.
    addSignatureTimeStamp(cms, await requestTimeStamp(tsa.url, sha256(Buffer.from('some other signature'))));
    const result = await verifySignedPdf(withMainContents(signed, signedDataToDer(cms)), anchors);
    expect(result.status).toBe('tampered');
    expect(result.reason).toMatch(/signature time-stamp: time-stamp imprint does not match/);
  });

  it('reports a time-stamp from an untrusted TSA as tampered', async () => {
    const foreign = await signPades(unsigned, materialFor(leaf, root, foreignTsa.url, foreignTsa.rootCertPem), signOptions);
    const result = await verifySignedPdf(foreign, anchors);
    expect(result.status).toBe('tampered');
    expect(result.reason).toMatch(/does not chain to a trusted time-stamping root/);
  });

  it('reports a change smuggled in before a genuine document time-stamp as tampered', async () => {
    // Cut back to the signed revision (B-T), edit the document information, then add genuine DSS and time-stamp.
    const [[, , c, d]] = ranges(signed);
    const edited = appendInfoUpdate(signed.subarray(0, c + d), 'Altered after signing');
    const relaunched = await addLongTermValidation(edited, tsa.url, [pemToDer(leaf.certPem), pemToDer(root.certPem)], []);
    const result = await verifySignedPdf(relaunched, anchors);
    expect(result.status).toBe('tampered');
    expect(result.reason).toMatch(/update after signing/);
  });

  it('reports an object redefined in an extra update between the signature and the DSS as tampered', async () => {
    const [[, , c, d]] = ranges(signed);
    const bt = signed.subarray(0, c + d);
    const structure = readStructure(bt);
    const infoNumber = refNumber(structure.infoRef!);
    // Same object number, new content: the trailer still names the same /Info, only its text changed.
    const edited = appendIncrementalUpdate(bt, structure, [{ number: infoNumber, body: '<< /Title (Altered after signing) /CertificateNumber (CL-2025-00042-r1) >>' }]);
    const relaunched = await addLongTermValidation(edited, tsa.url, [pemToDer(leaf.certPem), pemToDer(root.certPem)], []);
    const result = await verifySignedPdf(relaunched, anchors);
    expect(result.status).toBe('tampered');
    expect(result.reason).toMatch(new RegExp(`changes object ${infoNumber}\\b`));
  });

  it('reports a visible annotation added to the page before a genuine document time-stamp as tampered', async () => {
    const [[, , c, d]] = ranges(signed);
    const bt = signed.subarray(0, c + d);
    const structure = readStructure(bt);
    const catalog = objectBody(bt, structure, refNumber(structure.rootRef));
    const field = objectBody(bt, structure, arrayRefs(objectBody(bt, structure, dictRef(catalog, 'AcroForm')!), 'Fields')[0]);
    const pageNumber = Number(/\/P\s+(\d+)/.exec(field)![1]);
    const note = structure.size;
    const edited = appendIncrementalUpdate(bt, structure, [
      { number: note, body: '<< /Type /Annot /Subtype /FreeText /Rect [100 100 400 140] /Contents (Value corrected to 5900 m2/s2) /DA (/Helv 12 Tf 0 g) /F 4 >>' },
      { number: pageNumber, body: appendToArray(objectBody(bt, structure, pageNumber), 'Annots', [`${note} 0 R`]) },
    ]);
    const relaunched = await addLongTermValidation(edited, tsa.url, [pemToDer(leaf.certPem), pemToDer(root.certPem)], []);
    const result = await verifySignedPdf(relaunched, anchors);
    expect(result.status).toBe('tampered');
    expect(result.reason).toMatch(/not an invisible signature field/);
  });

  it('reports bytes appended after the document time-stamp as tampered', async () => {
    const result = await verifySignedPdf(appendInfoUpdate(signed, 'Altered after signing'), anchors);
    expect(result.status).toBe('tampered');
    expect(result.reason).toMatch(/appended/);
  });

  it('reports a signature lifted from another signed certificate as tampered', async () => {
    const [[, b, c]] = ranges(signed);
    const [[, ob, oc]] = ranges(otherSigned);
    const swapped = withMainContents(signed, Buffer.from(otherSigned.subarray(ob + 1, oc - 1).toString('latin1'), 'hex'));
    expect(oc - ob).toBe(c - b);
    const result = await verifySignedPdf(swapped, anchors);
    expect(result.status).toBe('tampered');
    expect(result.reason).toMatch(/messageDigest/);
    expect((await verifySignedPdf(otherSigned, anchors)).status).toBe('valid');
  });

  it('reports a signing certificate from another root as tampered', async () => {
    const otherRoot = createCertificate({ subject: { commonName: 'Elsewhere Root CA', organization: 'Elsewhere' }, profile: { kind: 'root-ca' }, bits: 2048 });
    const otherLeaf = createCertificate({ subject: { commonName: `${institute.commonName} certificate signing`, organization: institute.organization }, profile: { kind: 'document-signing' }, issuer: otherRoot, bits: 2048 });
    const result = await verifySignedPdf(await signPades(unsigned, materialFor(otherLeaf, otherRoot, tsa.url, tsa.rootCertPem), signOptions), anchors);
    expect(result.status).toBe('tampered');
    expect(result.reason).toMatch(/not issued by the pinned institute root/);
  });

  it('follows an intermediate CA (as a configured institute P12 may have) up to the pinned root', async () => {
    const topRoot = createCertificate({ subject: { commonName: 'Layered Root CA', organization: 'Layered' }, profile: { kind: 'root-ca', pathLength: 1 }, bits: 2048 });
    const intermediate = createCertificate({ subject: { commonName: 'Layered Issuing CA', organization: 'Layered' }, profile: { kind: 'root-ca' }, issuer: topRoot, bits: 2048 });
    const signer = createCertificate({ subject: { commonName: 'Layered signing', organization: 'Layered' }, profile: { kind: 'document-signing' }, issuer: intermediate, bits: 2048 });
    const der = (k: KeyAndCertificate) => pemToDer(k.certPem);
    const pdf = await signPades(unsigned, {
      signer: { keyPem: signer.keyPem, certificate: der(signer), chain: [der(intermediate), der(topRoot)] },
      tsaUrl: tsa.url,
      validationData: async (tsaCerts) => ({
        certificates: [der(signer), der(intermediate), der(topRoot), ...tsaCerts],
        crls: [await createCrl({ issuer: intermediate, crlNumber: 1, thisUpdate: new Date(), validityDays: 7, revoked: [] })],
      }),
    }, signOptions);
    const result = await verifySignedPdf(pdf, { ...anchors, instituteRoots: [der(topRoot)] });
    expect(result.status).toBe('valid');
    expect(result.report!.chain.map((c) => c.subject)).toEqual(['CN=Layered signing, O=Layered', 'CN=Layered Issuing CA, O=Layered', 'CN=Layered Root CA, O=Layered']);
    expect(result.report!.level).toBe('B-LTA');
    expect(result.report!.revocation.status).toBe('good');
    // Pinned to another root, the same file is refused.
    expect((await verifySignedPdf(pdf, anchors)).status).toBe('tampered');
  });

  it('rejects a signature made after the signing key was withdrawn, and keeps one made before', async () => {
    const serial = forge.pki.certificateFromPem(leaf.certPem).serialNumber;
    const withdrawn = (at: Date) => createCrl({ issuer: root, crlNumber: 2, thisUpdate: new Date(), validityDays: 7, revoked: [{ serialHex: serial, revokedAt: at, reasonCode: 1 }] });
    const before = await verifySignedPdf(signed, { ...anchors, currentCrl: await withdrawn(new Date(Date.now() - 3_600_000)) });
    expect(before.status).toBe('tampered');
    expect(before.reason).toMatch(/signing key was withdrawn/);
    const after = await verifySignedPdf(signed, { ...anchors, currentCrl: await withdrawn(new Date(Date.now() + 3_600_000)) });
    expect(after.status).toBe('valid');
    expect(after.report!.revocation.status).toBe('revoked-after-signing');
  });
});

describe('legacy signatures (self-signed institute key, adbe.pkcs7.detached)', () => {
  it('are still verified against the pinned legacy certificate and reported as legacy', async () => {
    const identity = await ensureInstituteSigningIdentity(path.join(workDir, 'legacy'), { commonName: 'Meridian certificate signing', organization: 'Meridian' });
    const legacy = await signPdf(unsigned, identity, { ...signOptions });
    const ok = await verifySignedPdf(legacy, { ...anchors, legacyCertificatePem: identity.certificatePem });
    expect(ok.status).toBe('valid');
    expect(ok.report!.level).toBe('legacy');
    expect(ok.signingTime).toBe(claimedTime.toISOString());
    const noPin = await verifySignedPdf(legacy, anchors);
    expect(noPin.status).toBe('tampered');
    expect(noPin.reason).toMatch(/legacy signature/);
    expect((await verifySignedPdf(flipped(legacy, 300), { ...anchors, legacyCertificatePem: identity.certificatePem })).status).toBe('tampered');
  });
});

describe.skipIf(!hasPdfsig || !hasCertutil)('external check: poppler pdfsig with the root in an NSS store (certutil)', () => {
  function pdfsig(pdf: Buffer, nssDir?: string): string {
    const file = path.join(workDir, `pdfsig-${Math.random().toString(36).slice(2)}.pdf`);
    writeFileSync(file, pdf);
    const run = spawnSync('pdfsig', [...(nssDir ? ['-nssdir', `sql:${nssDir}`] : []), file], { encoding: 'utf8' });
    return run.stdout + run.stderr;
  }

  it('pdfsig reports the signature valid and the certificate trusted once the institute root is imported', () => {
    const nss = path.join(workDir, 'nss');
    mkdirSync(nss);
    execFileSync('certutil', ['-N', '-d', `sql:${nss}`, '--empty-password']);
    execFileSync('certutil', ['-A', '-d', `sql:${nss}`, '-n', 'Meridian Root CA', '-t', 'C,C,C', '-i', path.join(workDir, 'root.pem')]);
    const report = pdfsig(signed, nss);
    const first = report.slice(report.indexOf('Signature #1'), report.indexOf('Signature #2'));
    expect(first).toContain('Signature Type: ETSI.CAdES.detached');
    expect(first).toContain('Signature Validation: Signature is Valid.');
    expect(first).toContain('Certificate Validation: Certificate is Trusted.');
    // The second signature is the document time-stamp (poppler 22 lists it but cannot validate ETSI.RFC3161).
    expect(report).toContain('Signature Field Name: DocumentTimeStamp1');
    // Without the root the same signature is valid but its issuer unknown.
    const empty = path.join(workDir, 'nss-empty');
    mkdirSync(empty);
    execFileSync('certutil', ['-N', '-d', `sql:${empty}`, '--empty-password']);
    expect(pdfsig(signed, empty)).toContain("Certificate issuer isn't Trusted.");
    expect(pdfsig(flipped(signed, 200), nss)).not.toContain('Signature is Valid.');
  });
});

describe.skipIf(!hasOpenssl)('external check: OpenSSL', () => {
  it('openssl ts -verify accepts the signature time-stamp (over the signature value) and the document time-stamp', () => {
    const signerInfo = mainCms(signed).signerInfos[0];
    writeFileSync(path.join(workDir, 'sig-token.der'), signatureTimeStampToken(mainCms(signed)));
    writeFileSync(path.join(workDir, 'sig-value.bin'), Buffer.from(signerInfo.signature.valueBlock.valueHexView));
    writeFileSync(path.join(workDir, 'tsa-root.pem'), tsa.rootCertPem);
    const ts = spawnSync('openssl', ['ts', '-verify', '-token_in', '-in', path.join(workDir, 'sig-token.der'), '-data', path.join(workDir, 'sig-value.bin'), '-CAfile', path.join(workDir, 'tsa-root.pem')], { encoding: 'utf8' });
    expect(ts.stdout + ts.stderr).toContain('Verification: OK');
    const [, [, tb, tc, td]] = ranges(signed);
    const token = Buffer.from(signed.subarray(tb + 1, tc - 1).toString('latin1').replace(/(00)+$/, ''), 'hex');
    writeFileSync(path.join(workDir, 'doc-token.der'), token);
    writeFileSync(path.join(workDir, 'doc-bytes.bin'), Buffer.concat([signed.subarray(0, tb), signed.subarray(tc, tc + td)]));
    const dts = spawnSync('openssl', ['ts', '-verify', '-token_in', '-in', path.join(workDir, 'doc-token.der'), '-data', path.join(workDir, 'doc-bytes.bin'), '-CAfile', path.join(workDir, 'tsa-root.pem')], { encoding: 'utf8' });
    expect(dts.stdout + dts.stderr).toContain('Verification: OK');
    // Against the wrong data OpenSSL refuses too.
    const bad = spawnSync('openssl', ['ts', '-verify', '-token_in', '-in', path.join(workDir, 'sig-token.der'), '-data', path.join(workDir, 'doc-bytes.bin'), '-CAfile', path.join(workDir, 'tsa-root.pem')], { encoding: 'utf8' });
    expect(bad.stdout + bad.stderr).not.toContain('Verification: OK');
  });

  it('openssl cms -verify accepts the CAdES signature over the signed bytes with the institute root as CA', () => {
    const [[, b, c, d]] = ranges(signed);
    writeFileSync(path.join(workDir, 'cms.der'), Buffer.from(signed.subarray(b + 1, c - 1).toString('latin1'), 'hex'));
    writeFileSync(path.join(workDir, 'signed-bytes.bin'), Buffer.concat([signed.subarray(0, b), signed.subarray(c, c + d)]));
    const run = spawnSync('openssl', ['cms', '-verify', '-binary', '-inform', 'DER', '-in', path.join(workDir, 'cms.der'), '-content', path.join(workDir, 'signed-bytes.bin'), '-CAfile', path.join(workDir, 'root.pem'), '-purpose', 'any', '-out', '/dev/null'], { encoding: 'utf8' });
    expect(run.stderr).toContain('Verification successful');
  });

  it('openssl crl verifies the CRLs in the DSS against their issuers', () => {
    const text = signed.toString('latin1');
    const dss = /\/Type \/DSS\s*\/Certs \[[^\]]*\]\s*\/CRLs \[([^\]]*)\]/.exec(text)!;
    const crlObjects = [...dss[1].matchAll(/(\d+) 0 R/g)].map((m) => Number(m[1]));
    expect(crlObjects).toHaveLength(2);
    const crlData = crlObjects.map((n) => {
      const at = text.indexOf(`\n${n} 0 obj`) + 1;
      const length = Number(/\/Length (\d+)/.exec(text.slice(at, at + 200))![1]);
      const start = text.indexOf('stream\n', at) + 7;
      return signed.subarray(start, start + length);
    });
    writeFileSync(path.join(workDir, 'institute.crl'), crlData[0]);
    writeFileSync(path.join(workDir, 'tsa.crl'), crlData[1]);
    const inst = spawnSync('openssl', ['crl', '-inform', 'DER', '-in', path.join(workDir, 'institute.crl'), '-CAfile', path.join(workDir, 'root.pem'), '-noout'], { encoding: 'utf8' });
    expect(inst.stdout + inst.stderr).toContain('verify OK');
    const tsaCrl = spawnSync('openssl', ['crl', '-inform', 'DER', '-in', path.join(workDir, 'tsa.crl'), '-CAfile', path.join(workDir, 'tsa-root.pem'), '-noout'], { encoding: 'utf8' });
    expect(tsaCrl.stdout + tsaCrl.stderr).toContain('verify OK');
    expect(readFileSync(path.join(workDir, 'tsa-root.pem'), 'utf8')).toContain('BEGIN CERTIFICATE');
  });
});
