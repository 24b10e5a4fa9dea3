import { describe, expect, it } from 'vitest';
import { buildPreview, detectDelimiter, parseIsoCell, parseMjdCell, parseOffsetCell, parseFlagCell } from '../../../server/uploads/ratio-series-format';
import { bucketsFromOverview, fillBuckets } from '../../../server/uploads/series-plot';

describe('epoch cells', () => {
  it('turns ISO 8601 UTC into MJD', () => {
    // MJD 51544.5 is 2000-01-01T12:00:00 (J2000.0 = JD 2451545.0; MJD = JD − 2400000.5, IAU convention)
    expect(parseIsoCell('2000-01-01T12:00:00Z')).toEqual({ ok: true, value: 51544.5 });
    // MJD 0 is 1858-11-17; 1970-01-01 is MJD 40587 (common practice, e.g. the POSIX ↔ MJD offset)
    expect(parseIsoCell('1970-01-01 00:00:00')).toEqual({ ok: true, value: 40587 });
    const frac = parseIsoCell('2026-03-01T00:00:00.25+00:00');
    expect(frac.ok && (frac.value - 61100) * 86400).toBeCloseTo(0.25, 5);
    expect(parseIsoCell('2026-02-30T00:00:00Z').ok).toBe(false);
    expect(parseIsoCell('2026-03-01T00:00:00+01:00').ok).toBe(false);
  });
  it('accepts plausible MJD only', () => {
    expect(parseMjdCell('61100.123456789')).toEqual({ ok: true, value: 61100.123456789 });
    expect(parseMjdCell('2461100.5').ok).toBe(false); // a Julian date, not an MJD
    expect(parseMjdCell('Infinity').ok).toBe(false);
  });
});

describe('value and flag cells', () => {
  it('refuses NaN, Infinity and implausible offsets', () => {
    expect(parseOffsetCell('-2.5e-16')).toEqual({ ok: true, value: -2.5e-16 });
    expect(parseOffsetCell('NaN').ok).toBe(false);
    expect(parseOffsetCell('inf').ok).toBe(false);
    expect(parseOffsetCell('1.0000000000000002').ok).toBe(false);
  });
  it('reads valid/invalid and 1/0', () => {
    expect(['valid', 'VALID', '1', 'invalid', '0', 'yes'].map(parseFlagCell)).toEqual([true, true, true, false, false, null]);
  });
});

describe('preview', () => {
  it('detects the delimiter consistently splitting the lines', () => {
    expect(detectDelimiter(['a;b;c', '1;2;3'])).toBe(';');
    expect(detectDelimiter(['# x', '61100\t1e-16', '61100.1\t2e-16'])).toBe('\t');
    expect(detectDelimiter(['61100,1.0,1', '61100.1,1.0,1'])).toBe(',');
  });
  it('drops the cut last line of a truncated read and suggests columns without a header', () => {
    const p = buildPreview('61100.0,1e-16,1\n61100.1,2e-16,0\n61100.2,3e-', 'x.csv', 45, true);
    expect(p.hasHeader).toBe(false);
    expect(p.rows.map((r) => r.line)).toEqual([1, 2]);
    expect(p.suggested).toEqual({ epochColumn: 1, epochKind: 'mjd', valueColumn: 2, valueKind: 'offset', flagColumn: 3 });
  });
});

describe('plot buckets', () => {
  it('marks buckets without valid samples as gaps', () => {
    const b = fillBuckets([{ k: 0, lo: -1, hi: 2, n: 3 }, { k: 2, lo: 0, hi: 0, n: 1 }, { k: 3, lo: null, hi: null, n: 0 }], 100, 0.5, 4);
    expect(b.map((x) => x.min)).toEqual([-1, null, 0, null]);
    expect(b.map((x) => x.mjd)).toEqual([100.25, 100.75, 101.25, 101.75]);
  });
  it('builds buckets from block summaries, keeping extremes and gaps', () => {
    const blocks: number[] = [];
    for (let i = 0; i < 400; i++) {
      if (i >= 200 && i < 300) continue; // a gap over a quarter of the span
      const t = i / 400;
      blocks.push(t, t + 0.002, i === 50 ? -9 : -1, i === 350 ? 7 : 1, 64);
    }
    const stats = new Float64Array((blocks.length / 5) * 2);
    const out = bucketsFromOverview(new Float64Array(blocks), stats, 0, 0.02, 50)!;
    expect(out).not.toBeNull();
    expect(Math.max(...out.map((b) => b.max ?? -Infinity))).toBe(7);
    expect(Math.min(...out.map((b) => b.min ?? Infinity))).toBe(-9);
    // blocks end at t = 0.4995 and resume at 0.75: buckets 25…36 (width 0.02) hold nothing
    expect(out.filter((b) => b.min === null)).toHaveLength(12);
    // too few blocks for the requested resolution: the caller falls back to the samples
    expect(bucketsFromOverview(new Float64Array(blocks.slice(0, 50)), stats.slice(0, 20), 0, 0.01, 100)).toBeNull();
    // a series stored without block statistics also falls back to the samples
    expect(bucketsFromOverview(new Float64Array(blocks), null, 0, 0.02, 50)).toBeNull();
  });
  it('combines block means and M2 into each bucket’s mean and sample standard deviation', () => {
    // Reference: the two-pass formula s² = Σ(y − ȳ)²/(n − 1) over the bucket's samples directly (common practice),
    // against the pairwise combination of Chan, Golub & LeVeque (1983) eq. 2.1 over the blocks.
    let seed = 7;
    const rnd = () => ((seed = (seed * 16807) % 2147483647) / 2147483647);
    const samples = Array.from({ length: 64 * 40 }, (_, i) => ({ t: i / (64 * 40), y: 6.5e-14 + (rnd() - 0.5) * 4e-16 }));
    const blocks: number[] = [];
    const stats: number[] = [];
    for (let b = 0; b < 40; b++) {
      const part = samples.slice(b * 64, (b + 1) * 64);
      const mean = part.reduce((a, p) => a + p.y, 0) / part.length;
      blocks.push(part[0].t, part[part.length - 1].t, Math.min(...part.map((p) => p.y)), Math.max(...part.map((p) => p.y)), part.length);
      stats.push(mean, part.reduce((a, p) => a + (p.y - mean) ** 2, 0));
    }
    const out = bucketsFromOverview(new Float64Array(blocks), new Float64Array(stats), 0, 0.1, 10)!;
    for (let k = 0; k < 10; k++) {
      const inBucket = samples.slice(k * 256, (k + 1) * 256).map((p) => p.y);
      const mean = inBucket.reduce((a, y) => a + y, 0) / inBucket.length;
      const sd = Math.sqrt(inBucket.reduce((a, y) => a + (y - mean) ** 2, 0) / (inBucket.length - 1));
      expect(out[k].count).toBe(256);
      expect(out[k].mean! / mean - 1).toBeCloseTo(0, 12);
      expect(out[k].sd! / sd - 1).toBeCloseTo(0, 9);
    }
  });
});
