import { spawnSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { readAttachments } from '../../../server/certificates/pdf/attachments';
import { dictRef, objectBody, readStructure, refNumber, streamObject } from '../../../server/certificates/pdf/incremental';
import { renderCertificatePdf } from '../../../server/certificates/pdf/render-certificate';
import { srgbIccProfile, srgbToLinear } from '../../../server/certificates/pdf/srgb-icc';
import { sampleSnapshot } from './fixtures/sample-snapshot';

// The PDF/A-3b parts that can be checked by parsing (ISO 19005-3:2012): file header (6.1.2), trailer /ID
// (6.1.3), output intent with an ICC profile (6.2.3), embedded fonts (6.2.11.4), XMP with the PDF/A
// identification schema mirroring the information dictionary (6.6.2), unfiltered metadata stream, and
// embedded files as associated files with /AFRelationship (6.8, Annex E). External readers: Debian
// poppler-utils pdfinfo, pdffonts and pdfdetach. Not checked here: a full PDF/A validator run.

const has = (cmd: string) => spawnSync(cmd, ['-v']).error === undefined;
const hasPoppler = has('pdfinfo') && has('pdffonts') && has('pdfdetach');
const workDir = mkdtempSync(path.join(tmpdir(), 'chronolevel-pdfa-'));
let pdf: Buffer;
let file: string;

beforeAll(async () => {
  pdf = await renderCertificatePdf(sampleSnapshot());
  file = path.join(workDir, 'certificate.pdf');
  writeFileSync(file, pdf);
});
afterAll(() => rmSync(workDir, { recursive: true, force: true }));

const s15 = (b: Buffer, at: number) => b.readInt32BE(at) / 65536;

describe('sRGB ICC profile (computed from IEC 61966-2-1)', () => {
  const icc = srgbIccProfile();
  const tags = new Map<string, { offset: number; size: number }>();
  for (let i = 0; i < icc.readUInt32BE(128); i++) {
    const at = 132 + i * 12;
    tags.set(icc.toString('latin1', at, at + 4), { offset: icc.readUInt32BE(at + 4), size: icc.readUInt32BE(at + 8) });
  }
  const xyz = (sig: string) => {
    const t = tags.get(sig)!;
    expect(icc.toString('latin1', t.offset, t.offset + 4)).toBe('XYZ ');
    return [s15(icc, t.offset + 8), s15(icc, t.offset + 12), s15(icc, t.offset + 16)];
  };

  it('has a well-formed ICC v2 display-class header (ICC.1:2001-04 6.1)', () => {
    expect(icc.readUInt32BE(0)).toBe(icc.length);
    expect(icc.readUInt32BE(8) >>> 24).toBe(2);
    expect(icc.toString('latin1', 12, 24)).toBe('mntrRGB XYZ ');
    expect(icc.toString('latin1', 36, 40)).toBe('acsp');
    // PCS illuminant D50 (ICC.1:2001-04 6.1.13): 0.9642, 1.0, 0.8249 in s15Fixed16.
    expect([s15(icc, 68), s15(icc, 72), s15(icc, 76)].map((v) => v.toFixed(4))).toEqual(['0.9642', '1.0000', '0.8249']);
    expect([...tags.keys()].sort()).toEqual(['bTRC', 'bXYZ', 'cprt', 'desc', 'gTRC', 'gXYZ', 'rTRC', 'rXYZ', 'wtpt']);
    for (const t of tags.values()) expect(t.offset + t.size).toBeLessThanOrEqual(icc.length);
  });

  it('has the D50-adapted sRGB colorants of the widely distributed "sRGB IEC61966-2.1" profile (values from memory, 4 decimals)', () => {
    // rXYZ 0.4361 0.2225 0.0139, gXYZ 0.3851 0.7169 0.0971, bXYZ 0.1431 0.0606 0.7141 (from memory).
    const close = (got: number[], want: number[]) => got.forEach((g, i) => expect(Math.abs(g - want[i])).toBeLessThan(5e-4));
    close(xyz('rXYZ'), [0.4361, 0.2225, 0.0139]);
    close(xyz('gXYZ'), [0.3851, 0.7169, 0.0971]);
    close(xyz('bXYZ'), [0.1431, 0.0606, 0.7141]);
    // The colorants add up to the PCS white (ICC.1:2001-04 Annex E: RGB (1,1,1) maps to the media white).
    const sum = [0, 1, 2].map((i) => xyz('rXYZ')[i] + xyz('gXYZ')[i] + xyz('bXYZ')[i]);
    close(sum, [0.9642, 1.0, 0.8249]);
  });

  it('samples the sRGB transfer function (IEC 61966-2-1 eq. 1): mid-grey 0.5 gives 0.2140 linear', () => {
    const t = tags.get('rTRC')!;
    expect(icc.toString('latin1', t.offset, t.offset + 4)).toBe('curv');
    const n = icc.readUInt32BE(t.offset + 8);
    expect(n).toBe(1024);
    const at = (v: number) => icc.readUInt16BE(t.offset + 12 + Math.round(v * (n - 1)) * 2) / 65535;
    expect(at(0)).toBe(0);
    expect(at(1)).toBe(1);
    // ((0.5 + 0.055) / 1.055)^2.4 = 0.21404 (IEC 61966-2-1, computed by hand from the equation).
    expect(srgbToLinear(0.5)).toBeCloseTo(0.21404, 5);
    expect(at(511 / 1023)).toBeCloseTo(srgbToLinear(511 / 1023), 4);
  });
});

describe('PDF/A-3b structure of a rendered certificate', () => {
  it('starts with a PDF 1.7 header and a binary comment, and has a trailer /ID', () => {
    expect(pdf.subarray(0, 8).toString('latin1')).toBe('%PDF-1.7');
    const second = pdf.subarray(pdf.indexOf(0x0a) + 1, pdf.indexOf(0x0a) + 6);
    expect(second[0]).toBe(0x25);
    expect([...second.subarray(1, 5)].every((b) => b > 127)).toBe(true);
    expect(readStructure(pdf).id).toMatch(/^\[\s*<[0-9a-f]+>\s*<[0-9a-f]+>\s*\]$/);
    expect(pdf.toString('latin1')).not.toContain('/Encrypt');
  });

  it('has a GTS_PDFA1 output intent whose profile is the sRGB profile, and an unfiltered XMP metadata stream', () => {
    const structure = readStructure(pdf);
    const catalog = objectBody(pdf, structure, refNumber(structure.rootRef));
    const intentRef = /\/OutputIntents\s*\[\s*(\d+)\s+0\s+R\s*\]/.exec(catalog)![1];
    const intent = objectBody(pdf, structure, Number(intentRef));
    expect(intent).toContain('/S /GTS_PDFA1');
    expect(intent).toContain('/OutputConditionIdentifier (sRGB IEC61966-2.1)');
    const profile = streamObject(pdf, structure, dictRef(intent, 'DestOutputProfile')!);
    expect(profile.dict).toContain('/N 3');
    expect(profile.data.equals(srgbIccProfile())).toBe(true);
    const metadata = streamObject(pdf, structure, dictRef(catalog, 'Metadata')!);
    expect(metadata.dict).toContain('/Subtype /XML');
    expect(metadata.dict).not.toContain('/Filter');
    const xmp = metadata.data.toString('utf8');
    expect(xmp).toContain('<pdfaid:part>3</pdfaid:part>');
    expect(xmp).toContain('<pdfaid:conformance>B</pdfaid:conformance>');
  });

  it('lists the snapshot JSON and the result CSV as associated files with /AFRelationship', () => {
    const structure = readStructure(pdf);
    const catalog = objectBody(pdf, structure, refNumber(structure.rootRef));
    expect(/\/AF\s*\[\s*\d+ 0 R\s+\d+ 0 R\s*\]/.test(catalog)).toBe(true);
    const attachments = readAttachments(pdf);
    expect(attachments.map((a) => [a.name, a.relationship, a.associated])).toEqual([
      ['CL-2025-00042-r1.result.csv', 'Data', true],
      ['CL-2025-00042-r1.snapshot.json', 'Source', true],
    ]);
    const snapshot = JSON.parse(attachments[1].data.toString('utf8'));
    expect(snapshot).toEqual(sampleSnapshot());
    // RFC 4180: CRLF line ends, one header row.
    const csv = attachments[0].data.toString('utf8');
    expect(csv.split('\r\n')[0]).toBe('certificate,quantity,value,unit,expanded_uncertainty,coverage_factor,standard_uncertainty,note');
    expect(csv).toContain(`CL-2025-00042-r1,geopotential_difference_deltaC,${sampleSnapshot().deltaC_m2s2.value},m2/s2,${sampleSnapshot().deltaC_m2s2.expandedUncertainty},2`);
  });
});

describe.skipIf(!hasPoppler)('external check with poppler-utils (pdfinfo, pdffonts, pdfdetach)', () => {
  const run = (cmd: string, args: string[]) => spawnSync(cmd, args, { encoding: 'utf8' }).stdout;

  it('pdfinfo reads the XMP and the information dictionary, and they agree on the title and author', () => {
    const info = run('pdfinfo', [file]);
    const meta = run('pdfinfo', ['-meta', file]);
    expect(info).toContain('Metadata Stream: yes');
    expect(info).toMatch(/PDF version:\s+1\.7/);
    const title = /^Title:\s+(.*)$/m.exec(info)![1];
    const author = /^Author:\s+(.*)$/m.exec(info)![1];
    expect(meta).toContain(`<rdf:li xml:lang="x-default">${title}</rdf:li>`);
    expect(meta).toContain(`<rdf:li>${author}</rdf:li>`);
    expect(meta).toContain('<pdfaid:part>3</pdfaid:part>');
  });

  it('pdffonts reports every font embedded', () => {
    const lines = run('pdffonts', [file]).split('\n').slice(2).filter((l) => l.trim());
    expect(lines.length).toBeGreaterThan(0);
    // Columns: name type encoding emb sub uni object ID; "emb" must be "yes" (ISO 19005-3 6.2.11.4.1).
    for (const l of lines) expect(l).toMatch(/\s(yes)\s+(yes|no)\s+(yes|no)\s+\d+\s+\d+\s*$/);
  });

  it('pdfdetach lists and saves the two embedded files', () => {
    expect(run('pdfdetach', ['-list', file])).toContain('2 embedded files');
    const out = path.join(workDir, 'out');
    spawnSync('mkdir', ['-p', out]);
    expect(spawnSync('pdfdetach', ['-saveall', '-o', out, file]).status).toBe(0);
    expect(JSON.parse(spawnSync('cat', [path.join(out, 'CL-2025-00042-r1.snapshot.json')], { encoding: 'utf8' }).stdout)).toEqual(sampleSnapshot());
  });
});
