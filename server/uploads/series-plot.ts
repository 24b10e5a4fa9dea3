import type { DataSource } from 'typeorm';
import type { SeriesBucket, SeriesPlot } from '../../shared/uploads';

// Plot data for a series: the span (or the requested range of it) cut into equal time buckets, each giving the
// mean and standard deviation of the valid y and its smallest and largest value, so a single outlier survives any
// zoom level (min/max decimation, common practice for time-series plotting); a bucket without valid samples comes
// back with nulls so the plot shows a break. Block statistics combine with the pairwise formulas of Chan, Golub &
// LeVeque, "Algorithms for computing the sample variance", The American Statistician 37(3), 1983, eq. 2.1.

export type BucketRow = { k: number; lo: number | null; hi: number | null; n: number; mean?: number | null; sd?: number | null };

const emptyBuckets = (fromMjd: number, bucketDays: number, count: number): SeriesBucket[] =>
  Array.from({ length: count }, (_, k) => ({ mjd: fromMjd + (k + 0.5) * bucketDays, min: null, max: null, count: 0, mean: null, sd: null }));

/** Lays the aggregated rows onto all `count` buckets; buckets PostgreSQL did not return are gaps. */
export function fillBuckets(rows: BucketRow[], fromMjd: number, bucketDays: number, count: number): SeriesBucket[] {
  const out = emptyBuckets(fromMjd, bucketDays, count);
  for (const r of rows) {
    const k = Number(r.k);
    if (k < 0 || k >= count || Number(r.n) === 0) continue;
    out[k] = { mjd: out[k].mjd, min: r.lo, max: r.hi, count: Number(r.n), mean: r.mean ?? null, sd: r.sd ?? null };
  }
  return out;
}

/**
 * Buckets from the stored block summaries (ingest.ts): each block lands in the bucket of its middle epoch. Exact enough
 * when blocks are much narrower than buckets; returns null when too few blocks fall in the range to say so, or when
 * the series has no block statistics (stored before they were kept).
 */
export function bucketsFromOverview(overview: Float64Array, stats: Float64Array | null, fromMjd: number, bucketDays: number, count: number): SeriesBucket[] | null {
  if (!stats || stats.length * 5 !== overview.length * 2) return null;
  const out = emptyBuckets(fromMjd, bucketDays, count);
  const m2 = new Float64Array(count);
  const toMjd = fromMjd + bucketDays * count;
  let inRange = 0;
  for (let i = 0, j = 0; i + 4 < overview.length; i += 5, j += 2) {
    const first = overview[i];
    const last = overview[i + 1];
    if (last < fromMjd || first > toMjd) continue;
    inRange++;
    const n = overview[i + 4];
    if (n === 0) continue;
    const k = Math.min(count - 1, Math.max(0, Math.floor(((first + last) / 2 - fromMjd) / bucketDays)));
    const b = out[k];
    b.min = b.min === null ? overview[i + 2] : Math.min(b.min, overview[i + 2]);
    b.max = b.max === null ? overview[i + 3] : Math.max(b.max, overview[i + 3]);
    const blockMean = stats[j];
    const blockM2 = stats[j + 1];
    if (b.mean === null) {
      b.mean = blockMean;
      m2[k] = blockM2;
    } else {
      const total = b.count + n;
      const delta = blockMean - b.mean;
      b.mean += (delta * n) / total;
      m2[k] += blockM2 + (delta * delta * b.count * n) / total;
    }
    b.count += n;
  }
  if (inRange < 4 * count) return null;
  for (let k = 0; k < count; k++) if (out[k].count > 1) out[k].sd = Math.sqrt(m2[k] / (out[k].count - 1));
  return out;
}

/** Fine blocks merged into one coarse block, at most (16 ⇒ ≈ 1024 samples per coarse block). */
export const COARSE_FACTOR = 16;

/**
 * The coarse level of a plot summary: runs of up to COARSE_FACTOR consecutive blocks merged, a run ending before any
 * space between blocks wider than twice the sampling interval τ0, so no coarse block bridges a gap. min and max merge
 * exactly; mean and M2 merge with the pairwise formulas of Chan, Golub & LeVeque (1983, eq. 2.1), as the buckets do.
 */
export function coarsenOverview(overview: Float64Array, stats: Float64Array, tau0Seconds: number): { overview: Float64Array; stats: Float64Array } {
  const fine = Math.floor(overview.length / 5);
  const out = new Float64Array(5 * fine); // room even if every space splits
  const outStats = new Float64Array(2 * fine);
  const maxStep = tau0Seconds > 0 ? (2 * tau0Seconds) / 86_400 : Infinity;
  let blocks = 0;
  let inRun = 0;
  let first = 0, last = 0, lo = NaN, hi = NaN, n = 0, mean = NaN, m2 = NaN;
  const close = () => {
    if (inRun === 0) return;
    out.set([first, last, lo, hi, n], blocks * 5);
    outStats.set([mean, m2], blocks * 2);
    blocks++;
    inRun = 0;
  };
  for (let b = 0; b < fine; b++) {
    const i = b * 5;
    if (inRun > 0 && (inRun >= COARSE_FACTOR || overview[i] - last > maxStep)) close();
    const bn = overview[i + 4];
    if (inRun === 0) {
      first = overview[i]; lo = NaN; hi = NaN; n = 0; mean = NaN; m2 = NaN;
    }
    last = overview[i + 1];
    inRun++;
    if (bn === 0) continue;
    const bMean = stats[b * 2];
    const bM2 = stats[b * 2 + 1];
    if (n === 0) {
      lo = overview[i + 2]; hi = overview[i + 3]; mean = bMean; m2 = bM2;
    } else {
      lo = Math.min(lo, overview[i + 2]);
      hi = Math.max(hi, overview[i + 3]);
      const total = n + bn;
      const delta = bMean - mean;
      mean += (delta * bn) / total;
      m2 += bM2 + (delta * delta * n * bn) / total;
    }
    n += bn;
  }
  close();
  return { overview: out.slice(0, blocks * 5), stats: outStats.slice(0, blocks * 2) };
}

// A series never changes once stored, so its summaries can be kept in memory (the few most recently plotted).
type Overview = { blocks: Float64Array; stats: Float64Array | null };
const overviewCache = new Map<string, Overview | null>();
const asFloats = (b: Buffer) => new Float64Array(b.buffer.slice(b.byteOffset, b.byteOffset + b.byteLength));
async function overviewOf(ds: DataSource, id: string, level: 'fine' | 'coarse'): Promise<Overview | null> {
  const key = `${level}:${id}`;
  const hit = overviewCache.get(key);
  if (hit !== undefined) return hit;
  const sql = level === 'fine'
    ? 'SELECT overview AS blocks, overview_stats AS stats FROM ratio_series WHERE id = $1'
    : 'SELECT overview_coarse AS blocks, overview_coarse_stats AS stats FROM ratio_series WHERE id = $1';
  const [row] = (await ds.query(sql, [id])) as { blocks: Buffer | null; stats: Buffer | null }[];
  const o = row?.blocks ? { blocks: asFloats(row.blocks), stats: row.stats ? asFloats(row.stats) : null } : null;
  overviewCache.set(key, o);
  if (overviewCache.size > 32) overviewCache.delete(overviewCache.keys().next().value!);
  return o;
}

export async function decimateSeries(
  ds: DataSource,
  s: { id: string; firstMjd: number; lastMjd: number; rowCount: number },
  q: { points: number; fromMjd?: number; toMjd?: number },
): Promise<SeriesPlot> {
  const fromMjd = Math.min(Math.max(q.fromMjd ?? s.firstMjd, s.firstMjd), s.lastMjd);
  let toMjd = Math.min(q.toMjd ?? s.lastMjd, s.lastMjd);
  if (!(toMjd > fromMjd)) toMjd = fromMjd + 1 / 86_400;
  // Zoomed in, no more buckets than about half the samples in the range: each bucket then holds a few samples,
  // so its mean and σ mean something and the line does not fall apart into single points.
  const inRange = s.rowCount * Math.min(1, (toMjd - fromMjd) / Math.max(s.lastMjd - s.firstMjd, 1e-9));
  const count = Math.max(10, Math.min(q.points, Math.floor(inRange / 2)));
  const bucketDays = (toMjd - fromMjd) / count;
  const head = { seriesId: s.id, fromMjd, toMjd, bucketDays, sampleCount: s.rowCount, unit: '1' as const, firstMjd: s.firstMjd, lastMjd: s.lastMjd };
  // The coarse level first when the range holds enough coarse blocks (≥ 4 per bucket, as bucketsFromOverview asks),
  // then the fine level, then the samples themselves.
  if (inRange / (64 * COARSE_FACTOR) >= 4 * count) {
    const coarse = await overviewOf(ds, s.id, 'coarse');
    const fromCoarse = coarse && bucketsFromOverview(coarse.blocks, coarse.stats, fromMjd, bucketDays, count);
    if (fromCoarse) return { ...head, buckets: fromCoarse };
  }
  const fine = await overviewOf(ds, s.id, 'fine');
  const fromOverview = fine && bucketsFromOverview(fine.blocks, fine.stats, fromMjd, bucketDays, count);
  if (fromOverview) return { ...head, buckets: fromOverview };
  const rows = (await ds.query(
    `SELECT least(floor((mjd - $2) / $4)::int, $5 - 1) AS k,
            min(y) FILTER (WHERE valid) AS lo, max(y) FILTER (WHERE valid) AS hi, count(*) FILTER (WHERE valid)::int AS n,
            avg(y) FILTER (WHERE valid) AS mean, stddev_samp(y) FILTER (WHERE valid) AS sd
       FROM ratio_sample WHERE series_id = $1 AND mjd >= $2 AND mjd <= $3
      GROUP BY 1`,
    [s.id, fromMjd, toMjd, bucketDays, count],
  )) as BucketRow[];
  return { ...head, buckets: fillBuckets(rows, fromMjd, bucketDays, count) };
}
