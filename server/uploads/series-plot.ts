import type { DataSource } from 'typeorm';
import type { SeriesBucket, SeriesPlot } from '../../shared/uploads';

// Plot data for a series: the span cut into equal time buckets, each giving the smallest and largest valid y, so a
// single outlier survives any zoom level (min/max decimation, common practice for time-series plotting); a bucket
// without valid samples comes back with nulls so the plot shows a break.

export type BucketRow = { k: number; lo: number | null; hi: number | null; n: number };

/** Lays the aggregated rows onto all `count` buckets; buckets PostgreSQL did not return are gaps. */
export function fillBuckets(rows: BucketRow[], fromMjd: number, bucketDays: number, count: number): SeriesBucket[] {
  const out: SeriesBucket[] = Array.from({ length: count }, (_, k) => ({ mjd: fromMjd + (k + 0.5) * bucketDays, min: null, max: null, count: 0 }));
  for (const r of rows) {
    const k = Number(r.k);
    if (k < 0 || k >= count || Number(r.n) === 0) continue;
    out[k] = { mjd: out[k].mjd, min: r.lo, max: r.hi, count: Number(r.n) };
  }
  return out;
}

/**
 * Buckets from the stored block summaries (ingest.ts): each block lands in the bucket of its middle epoch. Exact enough
 * when blocks are much narrower than buckets; returns null when too few blocks fall in the range to say so.
 */
export function bucketsFromOverview(overview: Float64Array, fromMjd: number, bucketDays: number, count: number): SeriesBucket[] | null {
  const out: SeriesBucket[] = Array.from({ length: count }, (_, k) => ({ mjd: fromMjd + (k + 0.5) * bucketDays, min: null, max: null, count: 0 }));
  const toMjd = fromMjd + bucketDays * count;
  let inRange = 0;
  for (let i = 0; i + 4 < overview.length; i += 5) {
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
    b.count += n;
  }
  return inRange >= 4 * count ? out : null;
}

// A series never changes once stored, so its overview can be kept in memory (the few most recently plotted).
const overviewCache = new Map<string, Float64Array>();
async function overviewOf(ds: DataSource, id: string): Promise<Float64Array> {
  const hit = overviewCache.get(id);
  if (hit) return hit;
  const [{ overview }] = (await ds.query('SELECT overview FROM ratio_series WHERE id = $1', [id])) as { overview: Buffer }[];
  const blocks = new Float64Array(overview.buffer.slice(overview.byteOffset, overview.byteOffset + overview.byteLength));
  overviewCache.set(id, blocks);
  if (overviewCache.size > 16) overviewCache.delete(overviewCache.keys().next().value!);
  return blocks;
}

export async function decimateSeries(
  ds: DataSource,
  s: { id: string; firstMjd: number; lastMjd: number; rowCount: number },
  q: { points: number; fromMjd?: number; toMjd?: number },
): Promise<SeriesPlot> {
  const fromMjd = Math.max(q.fromMjd ?? s.firstMjd, s.firstMjd);
  let toMjd = Math.min(q.toMjd ?? s.lastMjd, s.lastMjd);
  if (!(toMjd > fromMjd)) toMjd = fromMjd + 1 / 86_400;
  const count = q.points;
  const bucketDays = (toMjd - fromMjd) / count;
  const blocks = await overviewOf(ds, s.id);
  const fromOverview = bucketsFromOverview(blocks, fromMjd, bucketDays, count);
  if (fromOverview) return { seriesId: s.id, fromMjd, toMjd, bucketDays, sampleCount: s.rowCount, unit: '1', buckets: fromOverview };
  const rows = (await ds.query(
    `SELECT least(floor((mjd - $2) / $4)::int, $5 - 1) AS k,
            min(y) FILTER (WHERE valid) AS lo, max(y) FILTER (WHERE valid) AS hi, count(*) FILTER (WHERE valid)::int AS n
       FROM ratio_sample WHERE series_id = $1 AND mjd >= $2 AND mjd <= $3
      GROUP BY 1`,
    [s.id, fromMjd, toMjd, bucketDays, count],
  )) as BucketRow[];
  return { seriesId: s.id, fromMjd, toMjd, bucketDays, sampleCount: s.rowCount, unit: '1', buckets: fillBuckets(rows, fromMjd, bucketDays, count) };
}
