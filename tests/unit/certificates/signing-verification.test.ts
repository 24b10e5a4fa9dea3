import { execFileSync, spawnSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import forge from 'node-forge';
import { renderCertificatePdf } from '../../../server/certificates/pdf/render-certificate';
import { ensureInstituteSigningIdentity, signPdf, type SigningIdentity } from '../../../server/certificates/pdf/signing';
import { verifySignedPdf } from '../../../server/certificates/pdf/verify-pdf';
import { longSnapshot, sampleSnapshot } from './fixtures/sample-snapshot';

// Signature layout rules checked here come from ISO 32000-1:2008 12.8.1 (/ByteRange covers the
// whole file except the /Contents hex string) and RFC 5652 11.2 (messageDigest attribute). The
// external cross-check is Debian poppler-utils' pdfsig, an independent PDF signature validator.

const hasPdfsig = spawnSync('pdfsig', ['-v']).error === undefined;
const hasPdfinfo = spawnSync('pdfinfo', ['-v']).error === undefined;

const workDir = mkdtempSync(path.join(tmpdir(), 'chronolevel-cert-'));
const signingTime = new Date('2025-06-18T09:45:00Z');
const signOptions = { reason: 'Certificate issue', location: 'Meridian Geodetic Institute', name: 'Dr. Ilse Varga', signingTime };

let institute: SigningIdentity;
let foreign: SigningIdentity;
let unsigned: Buffer;
let signed: Buffer;
let otherSigned: Buffer;

/** Offsets of the /Contents gap, read the way a conforming reader does: from /ByteRange. */
function byteRange(pdf: Buffer): [number, number, number, number] {
  const m = /\/ByteRange\s*\[\s*(\d+)\s+(\d+)\s+(\d+)\s+(\d+)\s*\]/.exec(pdf.toString('latin1'));
  if (!m) throw new Error('no /ByteRange');
  return [Number(m[1]), Number(m[2]), Number(m[3]), Number(m[4])];
}

function flipped(pdf: Buffer, offset: number): Buffer {
  const copy = Buffer.from(pdf);
  copy[offset] ^= 0x01;
  return copy;
}

function pdfsig(pdf: Buffer, name: string): string {
  const file = path.join(workDir, name);
  writeFileSync(file, pdf);
  // pdfsig exits non-zero for some verdicts; its report on stdout is what we read.
  const run = spawnSync('pdfsig', [file], { encoding: 'utf8' });
  return run.stdout + run.stderr;
}

/** A genuine incremental update (ISO 32000-1 7.5.6): a new Info dictionary, xref section and trailer with /Prev. */
function appendIncrementalUpdate(pdf: Buffer): Buffer {
  const text = pdf.toString('latin1');
  const prev = Number([...text.matchAll(/startxref\s+(\d+)/g)].at(-1)![1]);
  const root = [...text.matchAll(/\/Root\s+(\d+\s+\d+\s+R)/g)].at(-1)![1];
  const size = Math.max(...[...text.matchAll(/\/Size\s+(\d+)/g)].map((m) => Number(m[1])));
  const objectOffset = pdf.length + 1;
  const body = `\n${size} 0 obj\n<< /Title (Altered after signing) /CertificateNumber (CL-2025-00042-r1) >>\nendobj\n`;
  const xrefOffset = pdf.length + Buffer.byteLength(body, 'latin1');
  const tail =
    `xref\n${size} 1\n${String(objectOffset).padStart(10, '0')} 00000 n \n` +
    `trailer\n<< /Size ${size + 1} /Root ${root} /Info ${size} 0 R /Prev ${prev} >>\nstartxref\n${xrefOffset}\n%%EOF\n`;
  return Buffer.concat([pdf, Buffer.from(body + tail, 'latin1')]);
}

beforeAll(async () => {
  const subject = { commonName: 'Meridian Geodetic Institute certificate signing', organization: 'Meridian Geodetic Institute' };
  institute = await ensureInstituteSigningIdentity(path.join(workDir, 'institute'), subject, { now: new Date('2025-01-01T00:00:00Z') });
  foreign = await ensureInstituteSigningIdentity(path.join(workDir, 'foreign'), { commonName: 'Someone else', organization: 'Elsewhere' });
  unsigned = await renderCertificatePdf(sampleSnapshot());
  signed = await signPdf(unsigned, institute, signOptions);
  otherSigned = await signPdf(await renderCertificatePdf(longSnapshot()), institute, signOptions);
});

afterAll(() => rmSync(workDir, { recursive: true, force: true }));

describe('signing identity', () => {
  it('creates an RSA-3072 self-signed certificate once and reuses it', async () => {
    const cert = forge.pki.certificateFromPem(institute.certificatePem);
    expect((cert.publicKey as forge.pki.rsa.PublicKey).n.bitLength()).toBe(3072);
    // Self-signed: the certificate verifies with its own key (RFC 5280 6.1, trust anchor).
    expect(cert.verify(cert)).toBe(true);
    const again = await ensureInstituteSigningIdentity(path.join(workDir, 'institute'), { commonName: 'ignored', organization: 'ignored' });
    expect(again.certificatePem).toBe(institute.certificatePem);
    expect(again.p12.equals(institute.p12)).toBe(true);
  });

  it('loads a given institute P12 instead of generating one', async () => {
    const p12Path = path.join(workDir, 'real.p12');
    writeFileSync(p12Path, institute.p12);
    const loaded = await ensureInstituteSigningIdentity(path.join(workDir, 'unused'), { commonName: 'x', organization: 'y' }, {
      p12Path,
      passphrase: institute.passphrase,
    });
    expect(loaded.certificatePem).toBe(institute.certificatePem);
    await expect(ensureInstituteSigningIdentity(workDir, { commonName: 'x', organization: 'y' }, { p12Path })).rejects.toThrow(/passphrase/);
  });
});

describe('verifySignedPdf', () => {
  it('accepts the untouched signed certificate and reports its number, time and digest', async () => {
    const result = await verifySignedPdf(signed, institute.certificatePem);
    expect(result.status).toBe('valid');
    expect(result.reason).toBeUndefined();
    expect(result.certificateNumber).toBe('CL-2025-00042-r1');
    expect(result.signingTime).toBe(signingTime.toISOString());
    // The digest covers exactly the two byte ranges (ISO 32000-1 12.8.1), recomputed independently here.
    const [a, b, c, d] = byteRange(signed);
    const expected = forge.md.sha256.create();
    expected.update(Buffer.concat([signed.subarray(a, a + b), signed.subarray(c, c + d)]).toString('binary'));
    expect(result.signedDigestSha256).toBe(expected.digest().toHex());
    expect(c + d).toBe(signed.length);
  });

  it('reports an unsigned PDF as unsigned', async () => {
    const result = await verifySignedPdf(unsigned, institute.certificatePem);
    expect(result.status).toBe('unsigned');
    expect(result.certificateNumber).toBe('CL-2025-00042-r1');
  });

  it('reports a single flipped byte anywhere in the signed ranges as tampered', async () => {
    const [, b, c] = byteRange(signed);
    const text = signed.toString('latin1');
    const positions = {
      'first byte of the file': 0,
      'header line': 5,
      'middle of the first range': Math.floor(b / 2),
      'certificate number string': text.indexOf('(CL-2025-00042-r1)') + 10,
      'inside a page content stream': text.indexOf('stream', text.indexOf('/Contents') + 1) + 20,
      'just before the signature': b - 1,
      'just after the signature': c,
      'near the end of the file': signed.length - 8,
    };
    for (const [where, offset] of Object.entries(positions)) {
      expect(offset, where).toBeGreaterThanOrEqual(0);
      const result = await verifySignedPdf(flipped(signed, offset), institute.certificatePem);
      expect(result.status, where).toBe('tampered');
      expect(result.reason, where).toBeTruthy();
    }
  });

  it('reports a changed signature value or padding inside /Contents as tampered', async () => {
    const [, b, c] = byteRange(signed);
    const hex = signed.subarray(b + 1, c - 1).toString('latin1');
    const endOfCms = b + 1 + hex.replace(/0+$/, '').length;
    // The RSA signature value is the last field of the CMS blob (RFC 5652 5.3, SignerInfo.signature).
    // XOR 0x01 maps '0'<->'1', '2'<->'3', 'a'<->'`'... so pick offsets holding digits to stay hex.
    const digitNear = (from: number) => {
      let i = from;
      while (!/[0-9]/.test(String.fromCharCode(signed[i]))) i--;
      return i;
    };
    const signatureValue = await verifySignedPdf(flipped(signed, digitNear(endOfCms - 40)), institute.certificatePem);
    expect(signatureValue.status).toBe('tampered');
    expect(signatureValue.reason).toMatch(/does not verify/);
    const padding = await verifySignedPdf(flipped(signed, c - 3), institute.certificatePem);
    expect(padding.status).toBe('tampered');
    expect(padding.reason).toMatch(/after the CMS signature/);
  });

  it('reports an appended incremental update as tampered, although a viewer would show the new data', async () => {
    const updated = appendIncrementalUpdate(signed);
    if (hasPdfinfo) {
      // The update is well formed: poppler's pdfinfo reads the altered title from it.
      expect(execFileSync('pdfinfo', ['-'], { input: updated, encoding: 'utf8' })).toContain('Altered after signing');
    }
    const result = await verifySignedPdf(updated, institute.certificatePem);
    expect(result.status).toBe('tampered');
    expect(result.reason).toMatch(/appended/);
  });

  it('reports a signature lifted from another signed certificate as tampered', async () => {
    const [, b, c] = byteRange(signed);
    const [, ob, oc] = byteRange(otherSigned);
    expect(oc - ob).toBe(c - b);
    const swapped = Buffer.concat([signed.subarray(0, b), otherSigned.subarray(ob, oc), signed.subarray(c)]);
    const result = await verifySignedPdf(swapped, institute.certificatePem);
    expect(result.status).toBe('tampered');
    expect(result.reason).toMatch(/messageDigest/);
    // The lifted signature itself is genuine in its own file.
    expect((await verifySignedPdf(otherSigned, institute.certificatePem)).status).toBe('valid');
  });

  it('reports a file signed by another key as tampered (foreign signer), though it is valid for that key', async () => {
    const foreignSigned = await signPdf(unsigned, foreign, signOptions);
    const result = await verifySignedPdf(foreignSigned, institute.certificatePem);
    expect(result.status).toBe('tampered');
    expect(result.reason).toMatch(/other than the pinned/);
    expect((await verifySignedPdf(foreignSigned, foreign.certificatePem)).status).toBe('valid');
  });
});

const pdfsigSuite = hasPdfsig
  ? 'external check with poppler pdfsig'
  : 'external check with poppler pdfsig: SKIPPED, pdfsig not found (install Debian poppler-utils)';

describe.skipIf(!hasPdfsig)(pdfsigSuite, () => {
  it('pdfsig reports the signed certificate as valid and wholly signed', () => {
    const report = pdfsig(signed, 'signed.pdf');
    expect(report).toContain('Signature Validation: Signature is Valid.');
    expect(report).toContain('Total document signed');
    expect(report).toContain('adbe.pkcs7.detached');
    expect(report).toContain('SHA-256');
  });

  it('pdfsig agrees that a flipped byte breaks the signature and an appended update is not covered', () => {
    expect(pdfsig(flipped(signed, 200), 'flipped.pdf')).not.toContain('Signature is Valid.');
    const report = pdfsig(appendIncrementalUpdate(signed), 'appended.pdf');
    expect(report).not.toContain('Total document signed');
  });
});
