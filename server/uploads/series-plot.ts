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

// A series never changes once stored, so its overview can be kept in memory (the few most recently plotted).
type Overview = { blocks: Float64Array; stats: Float64Array | null };
const overviewCache = new Map<string, Overview>();
const asFloats = (b: Buffer) => new Float64Array(b.buffer.slice(b.byteOffset, b.byteOffset + b.byteLength));
async function overviewOf(ds: DataSource, id: string): Promise<Overview> {
  const hit = overviewCache.get(id);
  if (hit) return hit;
  const [row] = (await ds.query('SELECT overview, overview_stats FROM ratio_series WHERE id = $1', [id])) as { overview: Buffer; overview_stats: Buffer | null }[];
  const o = { blocks: asFloats(row.overview), stats: row.overview_stats ? asFloats(row.overview_stats) : null };
  overviewCache.set(id, o);
  if (overviewCache.size > 16) overviewCache.delete(overviewCache.keys().next().value!);
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
  const { blocks, stats } = await overviewOf(ds, s.id);
  const fromOverview = bucketsFromOverview(blocks, stats, fromMjd, bucketDays, count);
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
