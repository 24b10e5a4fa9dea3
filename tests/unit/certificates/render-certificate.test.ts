import { execFileSync, spawnSync } from 'node:child_process';
import { mkdtempSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { renderCertificatePdf, STANDING_CAUTIONS, unitCell } from '../../../server/certificates/pdf/render-certificate';
import { certificateSnapshotSchema, formatCertificateNumber } from '../../../shared/certificates';
import type { CertificateSnapshot } from '../../../shared/certificates';
import { longSnapshot, sampleSnapshot } from './fixtures/sample-snapshot';

// The rendered PDF is read back with Debian poppler-utils (pdfinfo, pdftoppm, pdftotext), an
// independent PDF reader: what it extracts is what an auditor's tools will see.

const hasPoppler = ['pdfinfo', 'pdftoppm', 'pdftotext'].every((tool) => spawnSync(tool, ['-v']).error === undefined);
const workDir = mkdtempSync(path.join(tmpdir(), 'chronolevel-render-'));

interface Rendered {
  file: string;
  pages: number;
  text: string;
}

const rendered: Record<'sample' | 'long', Rendered> = {} as never;

async function renderToFile(name: string, snapshot: CertificateSnapshot): Promise<Rendered> {
  const file = path.join(workDir, `${name}.pdf`);
  writeFileSync(file, await renderCertificatePdf(snapshot));
  const info = execFileSync('pdfinfo', [file], { encoding: 'utf8' });
  const pages = Number(/^Pages:\s+(\d+)/m.exec(info)?.[1]);
  const text = execFileSync('pdftotext', ['-enc', 'UTF-8', file, '-'], { encoding: 'utf8' });
  return { file, pages, text };
}

/** Line wraps and hyphen-free breaks in extracted text become single spaces. */
function flat(text: string): string {
  return text.replace(/\s+/g, ' ');
}

interface Word {
  page: number;
  text: string;
  xMin: number;
  yMin: number;
  xMax: number;
  yMax: number;
}

function words(file: string): Word[] {
  const html = execFileSync('pdftotext', ['-bbox', '-enc', 'UTF-8', file, '-'], { encoding: 'utf8' });
  const out: Word[] = [];
  let page = 0;
  for (const line of html.split('\n')) {
    if (line.includes('<page ')) page++;
    const m = /<word xMin="([\d.]+)" yMin="([\d.]+)" xMax="([\d.]+)" yMax="([\d.]+)">(.*)<\/word>/.exec(line);
    if (m) out.push({ page, xMin: +m[1], yMin: +m[2], xMax: +m[3], yMax: +m[4], text: m[5] });
  }
  return out;
}

beforeAll(async () => {
  if (!hasPoppler) return;
  rendered.sample = await renderToFile('sample', sampleSnapshot());
  rendered.long = await renderToFile('long', longSnapshot());
});

afterAll(() => rmSync(workDir, { recursive: true, force: true }));

describe('certificate snapshot schema', () => {
  it('accepts the sample and enforces our numbering CL-<year>-<5-digit serial>-r<revision>', () => {
    expect(certificateSnapshotSchema.safeParse(sampleSnapshot()).success).toBe(true);
    expect(formatCertificateNumber(2025, 42, 1)).toBe('CL-2025-00042-r1');
    expect(() => formatCertificateNumber(2025, 100_000, 0)).toThrow(RangeError);
    const wrongRevision = { ...sampleSnapshot(), revision: 2 };
    expect(certificateSnapshotSchema.safeParse(wrongRevision).success).toBe(false);
    const badNumber = { ...sampleSnapshot(), certificateNumber: 'CL-25-42-r1' };
    expect(certificateSnapshotSchema.safeParse(badNumber).success).toBe(false);
  });

  it('refuses to render a snapshot that does not parse', async () => {
    const broken = { ...sampleSnapshot(), measuredRatio: 1.000000000000065 } as unknown as CertificateSnapshot;
    await expect(renderCertificatePdf(broken)).rejects.toThrow();
  });
});

const popplerSuite = hasPoppler ? 'rendered certificate read back with poppler' : 'rendered certificate: SKIPPED, poppler-utils not found (install Debian poppler-utils)';

describe.skipIf(!hasPoppler)(popplerSuite, () => {
  it('rasterises every page with pdftoppm at 60 dpi', () => {
    for (const [name, r] of Object.entries(rendered)) {
      const prefix = path.join(workDir, `${name}-page`);
      execFileSync('pdftoppm', ['-png', '-r', '60', r.file, prefix]);
      const pngs = readdirSync(workDir).filter((f) => f.startsWith(`${name}-page`) && f.endsWith('.png'));
      expect(pngs.length, name).toBe(r.pages);
    }
    expect(rendered.sample.pages).toBeGreaterThanOrEqual(2);
    // The long variant has ~35 budget rows and 25 input files; it must flow onto more pages.
    expect(rendered.long.pages).toBeGreaterThan(rendered.sample.pages);
  });

  it('shows every required item as extractable text', () => {
    const s = sampleSnapshot();
    const text = flat(rendered.sample.text);
    const required = [
      s.certificateNumber,
      'ΔC',
      'ΔH',
      'Eₙ against the sites’ registered normal heights (geodesy)',
      'k = 2',
      'Eₙ',
      '5886.13 ± 0.71 m²/s²',
      '600.260 ± 0.072 m',
      '600.214 ± 0.040 m',
      'Eₙ = 0.56',
      'agreed',
      s.issuingInstitute,
      s.clockA.name,
      s.clockB.name,
      s.fibreLink.name,
      s.measuredRatio,
      s.clockA.nominalFrequencyHz,
      s.tideSystem,
      'W₀',
      s.softwareVersion,
      s.signer.name,
      s.verificationUrl,
      ...s.budget.rows.map((r) => r.component),
      ...STANDING_CAUTIONS,
      ...s.cautions,
      ...s.method.sources,
    ];
    for (const item of required) expect(text, item).toContain(flat(item));
    // GUM 7.2.6: U is rounded to two significant digits; the budget shows U = 2·u_c.
    expect(text).toContain('Expanded uncertainty U, k = 2 0.71');
  });

  it('fills the unit column of the budget: a dash for dimensionless inputs, the unit otherwise (no bare "1")', () => {
    const text = flat(rendered.sample.text);
    // The four dimensionless rows (sensitivity c² = 8.988 × 10¹⁶ m²/s²) show a dash; the tide row keeps m²/s².
    expect(text.match(/10⁻\S+ — 8\.988 × 10¹⁶/g)?.length).toBe(4);
    expect(text).toMatch(/Solid-Earth and ocean tide model B [^A-Za-z]{0,40}m²\/s² Combined/);
    expect(text).not.toMatch(/Unit 1\b/);
    expect(unitCell('1')).toBe('—');
    expect(unitCell('1 (fractional)')).toBe('—');
    expect(unitCell('m²/s²')).toBe('m²/s²');
  });

  it('prints the certificate number and "page x of y" in the footer of every page', () => {
    for (const r of Object.values(rendered)) {
      for (let page = 1; page <= r.pages; page++) {
        const pageText = execFileSync('pdftotext', ['-enc', 'UTF-8', '-f', String(page), '-l', String(page), r.file, '-'], { encoding: 'utf8' });
        expect(pageText).toContain(`page ${page} of ${r.pages}`);
        expect(pageText).toMatch(/Certificate CL-\d{4}-\d{5}-r\d+/);
      }
    }
  });

  it('places no word on top of another (bounding boxes from pdftotext -bbox)', () => {
    for (const [name, r] of Object.entries(rendered)) {
      const all = words(r.file);
      expect(all.length).toBeGreaterThan(200);
      const overlaps: string[] = [];
      for (let i = 0; i < all.length; i++) {
        for (let j = i + 1; j < all.length; j++) {
          const a = all[i];
          const b = all[j];
          if (a.page !== b.page) continue;
          const dx = Math.min(a.xMax, b.xMax) - Math.max(a.xMin, b.xMin);
          const dy = Math.min(a.yMax, b.yMax) - Math.max(a.yMin, b.yMin);
          // Glyph boxes use the font's full ascent and descent, so adjacent lines touch by a hair.
          if (dx > 0.5 && dy > 2.5) overlaps.push(`${name} p${a.page}: "${a.text}" / "${b.text}"`);
        }
      }
      expect(overlaps).toEqual([]);
    }
  });
});
