import { scaleLinear, scaleUtc } from 'd3-scale';
import { area } from 'd3-shape';

// A time series as SVG from min/max buckets: the band between the extremes of each bucket (so single spikes show),
// broken wherever a bucket holds no valid sample (gaps stay visible). Time as MJD or UTC; y dimensionless, scaled.

export type TimeBucket = { mjd: number; min: number | null; max: number | null; count: number };

const MARGIN = { top: 14, right: 18, bottom: 46, left: 70 };
const MJD_UNIX_EPOCH = 40587;
const mjdToDate = (mjd: number) => new Date((mjd - MJD_UNIX_EPOCH) * 86_400_000);
const superscriptDigits: Record<string, string> = { '-': '⁻', 0: '⁰', 1: '¹', 2: '²', 3: '³', 4: '⁴', 5: '⁵', 6: '⁶', 7: '⁷', 8: '⁸', 9: '⁹' };
const sup = (n: number) => String(n).split('').map((c) => superscriptDigits[c] ?? c).join('');

export function TimeSeriesPlot({ buckets, timeAxis = 'mjd', title, yName = 'Fractional frequency offset y', width = 760, height = 300 }: {
  buckets: TimeBucket[]; timeAxis?: 'mjd' | 'utc'; title: string; yName?: string; width?: number; height?: number;
}) {
  const filled = buckets.filter((b) => b.min !== null && b.max !== null);
  if (buckets.length === 0 || filled.length === 0) return <p className="text-sm text-ink-500">No valid samples to plot.</p>;
  const maxAbs = Math.max(...filled.map((b) => Math.max(Math.abs(b.min!), Math.abs(b.max!))));
  // Labels in units of 10^e so the axis reads in plain numbers; 1e-16 is the usual scale of optical clock comparisons.
  const exp = maxAbs > 0 ? Math.min(-16, Math.floor(Math.log10(maxAbs))) : -16;
  const unit = 10 ** exp;
  const lo = Math.min(...filled.map((b) => b.min!)) / unit;
  const hi = Math.max(...filled.map((b) => b.max!)) / unit;
  const pad = (hi - lo) * 0.08 || 1;
  const y = scaleLinear().domain([lo - pad, hi + pad]).nice().range([height - MARGIN.bottom, MARGIN.top]);
  const first = buckets[0].mjd;
  const last = buckets[buckets.length - 1].mjd;
  const xm = scaleLinear().domain([first, last > first ? last : first + 1e-6]).range([MARGIN.left, width - MARGIN.right]);
  const xu = scaleUtc().domain([mjdToDate(first), mjdToDate(last > first ? last : first + 1e-6)]).range([MARGIN.left, width - MARGIN.right]);
  const xTicks = timeAxis === 'utc'
    ? xu.ticks(6).map((d) => ({ x: xu(d), label: xu.tickFormat(6)(d) }))
    : xm.ticks(6).map((t) => ({ x: xm(t), label: t.toFixed(Math.max(0, -Math.floor(Math.log10(Math.max(1e-9, (last - first) / 6))))) }));
  const band = area<TimeBucket>()
    .defined((b) => b.min !== null && b.max !== null)
    .x((b) => xm(b.mjd))
    .y0((b) => y(b.min! / unit))
    .y1((b) => y(b.max! / unit));
  const gaps = buckets.filter((b) => b.min === null).length;
  const xLabel = timeAxis === 'utc' ? 'Time (UTC)' : 'Time (MJD, days)';
  const yLabel = `${yName} (×10${sup(exp)})`;
  return (
    <figure>
      <svg viewBox={`0 0 ${width} ${height}`} className="w-full max-w-4xl" role="img" aria-label={title} data-testid="time-series-plot">
        <title>{title}</title>
        {y.ticks(6).map((t) => (
          <g key={`y${t}`}>
            <line x1={MARGIN.left} x2={width - MARGIN.right} y1={y(t)} y2={y(t)} className="stroke-paper-200" />
            <text x={MARGIN.left - 6} y={y(t) + 4} textAnchor="end" className="fill-ink-500 text-[11px]">{t}</text>
          </g>
        ))}
        {xTicks.map((t) => (
          <g key={`x${t.x}`}>
            <line x1={t.x} x2={t.x} y1={MARGIN.top} y2={height - MARGIN.bottom} className="stroke-paper-200" />
            <text x={t.x} y={height - MARGIN.bottom + 16} textAnchor="middle" className="fill-ink-500 text-[11px]">{t.label}</text>
          </g>
        ))}
        <rect x={MARGIN.left} y={MARGIN.top} width={width - MARGIN.left - MARGIN.right} height={height - MARGIN.top - MARGIN.bottom} className="fill-none stroke-ink-200" />
        <path d={band(buckets) ?? ''} className="fill-ink-300 stroke-ink-700" strokeWidth={0.8} data-testid="series-band" />
        <text x={(MARGIN.left + width - MARGIN.right) / 2} y={height - 8} textAnchor="middle" className="fill-ink-700 text-[12px]">{xLabel}</text>
        <text transform={`translate(16 ${(MARGIN.top + height - MARGIN.bottom) / 2}) rotate(-90)`} textAnchor="middle" className="fill-ink-700 text-[12px]">{yLabel}</text>
      </svg>
      <figcaption className="mt-1 text-xs text-ink-600">
        Band: smallest to largest valid y in each of {buckets.length} time slices; breaks are slices without valid samples ({gaps} here).
      </figcaption>
    </figure>
  );
}
