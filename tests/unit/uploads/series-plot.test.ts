import { Readable, Writable } from 'node:stream';
import { describe, expect, it } from 'vitest';
import { finishCopy, ingestRatioSeries } from '../../../server/uploads/ingest';
import { bucketsFromOverview, COARSE_FACTOR, coarsenOverview } from '../../../server/uploads/series-plot';

// The coarse plot summary against the samples themselves: every coarse block must hold exactly the samples between
// its first and last epoch, with their count, min and max, and the mean and sample variance computed directly
// (two-pass definition; the merge uses the pairwise update of Chan, Golub & LeVeque, The American Statistician
// 37(3), 1983, eq. 2.1), and no coarse block may bridge a gap in the series.
const TAU0 = 1; // s
const N = 120_000;

function series() {
  const rows: { mjd: number; y: number; valid: boolean }[] = [];
  for (let i = 0; i < N; i++) {
    if ((i >= 30_000 && i < 31_000) || (i >= 70_500 && i < 70_503)) continue; // a long gap and a 3-sample gap
    const y = i === 55_555 ? 4e-15 : 2e-16 * Math.sin(i / 700) + 1e-17 * Math.cos(i * 1.7);
    rows.push({ mjd: 61_400 + (i * TAU0) / 86_400, y, valid: i % 97 !== 0 });
  }
  return rows;
}

async function summarise(rows: { mjd: number; y: number; valid: boolean }[]) {
  const text = `mjd,y,flag\n${rows.map((r) => `${r.mjd.toFixed(10)},${r.y},${r.valid ? 1 : 0}`).join('\n')}\n`;
  const sink = new Writable({ write(_c, _e, cb) { cb(); } });
  const s = await ingestRatioSeries(Readable.from([Buffer.from(text)]), sink, {
    seriesId: '00000000-0000-4000-8000-000000000002',
    mapping: { epochColumn: 1, epochKind: 'mjd', valueColumn: 2, valueKind: 'offset', flagColumn: 3 },
    referenceRatio: '1', periodStartMjd: null, periodEndMjd: null,
  });
  await finishCopy(sink);
  expect(s.issues).toEqual([]);
  return s;
}

describe('coarse plot summary', () => {
  it('holds, per coarse block, exactly the statistics of its samples and never bridges a gap', async () => {
    const rows = series();
    const s = await summarise(rows);
    // the samples as ingest stored them (y read back from the CSV text, as the server would)
    const ys = rows.map((r) => ({ mjd: Number(r.mjd.toFixed(10)), y: Number(String(r.y)), valid: r.valid }));
    const c = coarsenOverview(s.overview, s.overviewStats, s.tau0Seconds);
    const fineBlocks = s.overview.length / 5;
    const coarseBlocks = c.overview.length / 5;
    expect(coarseBlocks).toBeGreaterThanOrEqual(Math.ceil(fineBlocks / COARSE_FACTOR));
    expect(coarseBlocks).toBeLessThan(fineBlocks / 8);
    let j = 0;
    let covered = 0;
    let outside = 0;
    let bridged = 0;
    for (let b = 0; b < coarseBlocks; b++) {
      const [first, last, lo, hi, n] = c.overview.subarray(b * 5, b * 5 + 5);
      const inBlock: typeof ys = [];
      while (j < ys.length && ys[j].mjd <= last) {
        if (ys[j].mjd < first) outside++;
        inBlock.push(ys[j++]);
      }
      covered += inBlock.length;
      for (let k = 1; k < inBlock.length; k++) if ((inBlock[k].mjd - inBlock[k - 1].mjd) * 86_400 > 2 * TAU0 + 1e-3) bridged++;
      const valid = inBlock.filter((r) => r.valid).map((r) => r.y);
      expect(n).toBe(valid.length);
      if (valid.length === 0) continue;
      expect(lo).toBe(Math.min(...valid));
      expect(hi).toBe(Math.max(...valid));
      const mean = valid.reduce((a, v) => a + v, 0) / valid.length;
      const m2 = valid.reduce((a, v) => a + (v - mean) ** 2, 0);
      expect(Math.abs(c.stats[b * 2] - mean)).toBeLessThan(1e-12 * Math.abs(hi - lo) + 1e-30);
      expect(Math.abs(c.stats[b * 2 + 1] - m2)).toBeLessThanOrEqual(1e-9 * m2 + 1e-45);
    }
    expect(covered).toBe(ys.length);
    expect(outside).toBe(0);
    expect(bridged).toBe(0);
  });

  it('gives whole-span buckets that agree with the fine level: total count, the spike, the gap', async () => {
    const rows = series();
    const s = await summarise(rows);
    const c = coarsenOverview(s.overview, s.overviewStats, s.tau0Seconds);
    const from = s.firstMjd;
    const count = 20; // ≥ 4 coarse blocks per bucket
    const days = (s.lastMjd - s.firstMjd) / count;
    const coarse = bucketsFromOverview(c.overview, c.stats, from, days, count)!;
    const fine = bucketsFromOverview(s.overview, s.overviewStats, from, days, count)!;
    expect(coarse).not.toBeNull();
    expect(coarse.reduce((a, b) => a + b.count, 0)).toBe(s.validCount);
    expect(Math.max(...coarse.map((b) => b.max ?? -1))).toBe(4e-15);
    for (let k = 0; k < count; k++) {
      // a bucket's count may move by a block at its edges (blocks land by their middle epoch): at most one coarse block
      expect(Math.abs(coarse[k].count - fine[k].count)).toBeLessThanOrEqual(64 * COARSE_FACTOR);
      if (coarse[k].sd !== null && fine[k].sd !== null) expect(Math.abs(coarse[k].sd! - fine[k].sd!) / fine[k].sd!).toBeLessThan(0.2);
    }
  });
});
