import { execFileSync, spawnSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { renderCertificatePdf } from '../../../server/certificates/pdf/render-certificate';
import { certificateSnapshotSchema, type CertificateSnapshot } from '../../../shared/certificates';
import { sampleSnapshot } from './fixtures/sample-snapshot';

// k, p and ν_eff beside every U (JCGM 100:2008 G.6.4, 7.2.3), y with enough digits, and the Assumptions block, read back
// from the PDF with poppler's pdftotext (an independent reader).
const hasPoppler = spawnSync('pdftotext', ['-v']).error === undefined;
const workDir = mkdtempSync(path.join(tmpdir(), 'chronolevel-coverage-'));
afterAll(() => rmSync(workDir, { recursive: true, force: true }));

function withCoverage(): CertificateSnapshot {
  const s = sampleSnapshot();
  const coverage = { coverageFactor: 2.17, coverageProbability: 0.9544997361036416, effectiveDegreesOfFreedom: 16.4 };
  return {
    ...s,
    fractionalOffset: { ...s.fractionalOffset, yText: '6.54432123e-14' },
    deltaC_m2s2: { ...s.deltaC_m2s2, ...coverage },
    deltaH_m: { ...s.deltaH_m, ...coverage },
    geodeticComparison: { ...s.geodeticComparison, deltaHGeodesy_m: { ...s.geodeticComparison.deltaHGeodesy_m, coverageFactor: 2, coverageProbability: coverage.coverageProbability, effectiveDegreesOfFreedom: null } },
    budget: { ...s.budget, ...coverage },
    assumptions: ['All budget inputs are taken as uncorrelated.', 'Site frames are taken as coincident.'],
  };
}

describe.skipIf(!hasPoppler)('coverage statement on the certificate', () => {
  it('prints k, p and ν_eff beside each U, y to the recorded digits, and the assumptions', async () => {
    const s = withCoverage();
    expect(certificateSnapshotSchema.safeParse(s).success).toBe(true);
    const file = path.join(workDir, 'c.pdf');
    writeFileSync(file, await renderCertificatePdf(s));
    const text = execFileSync('pdftotext', ['-enc', 'UTF-8', file, '-'], { encoding: 'utf8' }).replace(/\s+/g, ' ');
    expect(text).toContain('expanded uncertainty U, k = 2.17, p = 95.45 %, ν_eff = 16.4');
    expect(text).toContain('k = 2.00, p = 95.45 %, ν_eff = infinite');
    // The budget's U is k·u_c with the stated k: 2.17 × 0.355 = 0.77 (two significant digits, GUM 7.2.6); the label wraps.
    expect(text).toMatch(/Expanded uncertainty U, k = 2\.17, p = 95\.45 %, (ν_eff = 16\.4 )?0\.77/);
    expect(text).toContain('6.54432123e-14');
    expect(text).toContain('Assumptions');
    expect(text).toContain('All budget inputs are taken as uncorrelated.');
  });

  it('keeps rendering snapshots issued before k, p and ν_eff were recorded (k = 2 only)', async () => {
    const file = path.join(workDir, 'old.pdf');
    writeFileSync(file, await renderCertificatePdf(sampleSnapshot()));
    const text = execFileSync('pdftotext', ['-enc', 'UTF-8', file, '-'], { encoding: 'utf8' }).replace(/\s+/g, ' ');
    expect(text).toContain('Expanded uncertainty U, k = 2 0.71');
    expect(text).not.toContain('Assumptions');
  });
});
