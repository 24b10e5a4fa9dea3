import { scaleLinear, scaleUtc } from 'd3-scale';
import { area, line } from 'd3-shape';
import { useEffect, useRef, useState, type KeyboardEvent, type PointerEvent, type WheelEvent } from 'react';
import { superscript, withMinus } from '../../lib/format';

// A decimated time series as SVG: per time bucket the mean of the valid y as a line and ±1 standard deviation as a
// band; the smallest and largest sample only once zoomed in, where they no longer drown the signal. Breaks wherever
// a bucket holds no valid sample. Zoom by dragging across a time range, the mouse wheel, the buttons or the keyboard
// (+ − ← → 0); the caller refetches the server's decimation for the range shown.

export type TimeBucket = { mjd: number; min: number | null; max: number | null; count: number; mean: number | null; sd: number | null };
export type MjdRange = { fromMjd: number; toMjd: number };

const MARGIN = { top: 14, right: 18, bottom: 46, left: 64 };
const MJD_UNIX_EPOCH = 40587;
const mjdToDate = (mjd: number) => new Date((mjd - MJD_UNIX_EPOCH) * 86_400_000);
/** Narrowest range one can zoom to: about a minute. */
const MIN_SPAN_DAYS = 1 / 1440;

const hasData = (b: TimeBucket) => b.mean !== null && b.min !== null && b.max !== null;

/** Width of the element in CSS pixels, following resizes (the plot draws at its real size, so text keeps its size). */
function useWidth<T extends HTMLElement>(fallback: number) {
  const ref = useRef<T>(null);
  const [width, setWidth] = useState(fallback);
  useEffect(() => {
    const el = ref.current;
    if (!el) return;
    const ro = new ResizeObserver(([entry]) => setWidth(Math.max(320, Math.round(entry.contentRect.width))));
    ro.observe(el);
    return () => ro.disconnect();
  }, []);
  return [ref, width] as const;
}

export function TimeSeriesPlot({ buckets, range, full, onRangeChange, loading, timeAxis = 'mjd', title, yName = 'fractional frequency offset y', height = 320 }: {
  buckets: TimeBucket[];
  /** The range the buckets cover. */
  range: MjdRange;
  /** The whole series. */
  full: MjdRange;
  onRangeChange: (r: MjdRange | null) => void;
  loading?: boolean;
  timeAxis?: 'mjd' | 'utc';
  title: string;
  yName?: string;
  height?: number;
}) {
  const [boxRef, width] = useWidth<HTMLDivElement>(900);
  const [drag, setDrag] = useState<{ x0: number; x1: number } | null>(null);
  const filled = buckets.filter(hasData);
  const fullSpan = full.toMjd - full.fromMjd;
  const zoomed = range.toMjd - range.fromMjd < fullSpan * 0.999;
  const showExtremes = zoomed;

  const xm = scaleLinear().domain([range.fromMjd, range.toMjd > range.fromMjd ? range.toMjd : range.fromMjd + 1e-6]).range([MARGIN.left, width - MARGIN.right]);
  const clampRange = (from: number, to: number): MjdRange => {
    let span = Math.max(MIN_SPAN_DAYS, Math.min(to - from, fullSpan));
    if (!(span > 0)) span = fullSpan;
    const start = Math.min(Math.max(from, full.fromMjd), full.toMjd - span);
    return { fromMjd: start, toMjd: start + span };
  };
  const apply = (r: MjdRange) => (r.toMjd - r.fromMjd >= fullSpan * 0.999 ? onRangeChange(null) : onRangeChange(r));
  const zoomAround = (centre: number, factor: number) => {
    const from = centre - (centre - range.fromMjd) * factor;
    const to = centre + (range.toMjd - centre) * factor;
    apply(clampRange(from, to));
  };
  const pan = (fraction: number) => {
    const shift = (range.toMjd - range.fromMjd) * fraction;
    apply(clampRange(range.fromMjd + shift, range.toMjd + shift));
  };

  const svgX = (e: { clientX: number; currentTarget: Element }) => {
    const rect = e.currentTarget.getBoundingClientRect();
    return Math.min(Math.max(((e.clientX - rect.left) / rect.width) * width, MARGIN.left), width - MARGIN.right);
  };
  const onPointerDown = (e: PointerEvent<SVGSVGElement>) => {
    if (e.button !== 0) return;
    e.currentTarget.setPointerCapture(e.pointerId);
    const x = svgX(e);
    setDrag({ x0: x, x1: x });
  };
  const onPointerMove = (e: PointerEvent<SVGSVGElement>) => drag && setDrag({ ...drag, x1: svgX(e) });
  const onPointerUp = () => {
    if (drag && Math.abs(drag.x1 - drag.x0) > 6) {
      const a = xm.invert(Math.min(drag.x0, drag.x1));
      const b = xm.invert(Math.max(drag.x0, drag.x1));
      apply(clampRange(a, b));
    }
    setDrag(null);
  };
  const onWheel = (e: WheelEvent<SVGSVGElement>) => {
    if (!e.deltaY) return;
    zoomAround(xm.invert(svgX(e)), e.deltaY < 0 ? 0.8 : 1.25);
  };
  const onKeyDown = (e: KeyboardEvent<SVGSVGElement>) => {
    const centre = (range.fromMjd + range.toMjd) / 2;
    const actions: Record<string, () => void> = {
      '+': () => zoomAround(centre, 0.5), '=': () => zoomAround(centre, 0.5), '-': () => zoomAround(centre, 2),
      ArrowLeft: () => pan(-0.25), ArrowRight: () => pan(0.25), '0': () => onRangeChange(null), Home: () => onRangeChange(null),
    };
    const act = Object.hasOwn(actions, e.key) ? actions[e.key] : undefined;
    if (act) {
      e.preventDefault();
      act();
    }
  };
  // The wheel zooms the plot, not the page, while the pointer is over it.
  const svgRef = useRef<SVGSVGElement>(null);
  useEffect(() => {
    const el = svgRef.current;
    if (!el) return;
    const stop = (ev: globalThis.WheelEvent) => ev.preventDefault();
    el.addEventListener('wheel', stop, { passive: false });
    return () => el.removeEventListener('wheel', stop);
  }, []);

  if (buckets.length === 0 || filled.length === 0) {
    return (
      <div ref={boxRef}>
        <p className="text-sm text-ink-500">No valid samples in this range.</p>
        {zoomed && <button type="button" className="mt-2 text-sm underline" onClick={() => onRangeChange(null)}>Show the whole series</button>}
      </div>
    );
  }

  // The y axis covers what is drawn: the ±1σ band and the mean, and the extremes only when they are shown.
  const lows = filled.map((b) => (showExtremes ? b.min! : b.mean! - (b.sd ?? 0)));
  const highs = filled.map((b) => (showExtremes ? b.max! : b.mean! + (b.sd ?? 0)));
  const rawLo = Math.min(...lows);
  const rawHi = Math.max(...highs);
  const maxAbs = Math.max(Math.abs(rawLo), Math.abs(rawHi));
  // Labels in units of 10^e so the axis reads in plain numbers; 1e-16 is the usual scale of optical clock comparisons.
  const exp = maxAbs > 0 ? Math.min(-16, Math.floor(Math.log10(maxAbs))) : -16;
  const unit = 10 ** exp;
  const pad = (rawHi - rawLo) * 0.06 || Math.abs(rawHi) * 1e-3 || unit;
  const y = scaleLinear().domain([(rawLo - pad) / unit, (rawHi + pad) / unit]).nice().range([height - MARGIN.bottom, MARGIN.top]);
  const yTicks = y.ticks(6);
  const yFormat = y.tickFormat(6);
  const xu = scaleUtc().domain([mjdToDate(range.fromMjd), mjdToDate(range.toMjd)]).range([MARGIN.left, width - MARGIN.right]);
  const tickCount = Math.max(3, Math.floor((width - MARGIN.left - MARGIN.right) / 110));
  const xTicks = timeAxis === 'utc'
    ? xu.ticks(tickCount).map((d) => ({ x: xu(d), label: xu.tickFormat(tickCount)(d) }))
    : xm.ticks(tickCount).map((t) => ({ x: xm(t), label: xm.tickFormat(tickCount, 'f')(t) }));

  const defined = (b: TimeBucket) => hasData(b);
  const sdBand = area<TimeBucket>().defined(defined).x((b) => xm(b.mjd)).y0((b) => y((b.mean! - (b.sd ?? 0)) / unit)).y1((b) => y((b.mean! + (b.sd ?? 0)) / unit));
  const extremes = area<TimeBucket>().defined(defined).x((b) => xm(b.mjd)).y0((b) => y(b.min! / unit)).y1((b) => y(b.max! / unit));
  const meanLine = line<TimeBucket>().defined(defined).x((b) => xm(b.mjd)).y((b) => y(b.mean! / unit));
  const gaps = buckets.filter((b) => !hasData(b)).length;
  const xLabel = timeAxis === 'utc' ? 'Time (UTC)' : 'Time (MJD, days)';
  const yLabel = `${yName} (×10${superscript(exp)})`;
  const plotW = width - MARGIN.left - MARGIN.right;
  const plotH = height - MARGIN.top - MARGIN.bottom;
  const fmtMjd = (v: number) => v.toFixed(range.toMjd - range.fromMjd < 1 ? 4 : 2);

  return (
    <div ref={boxRef} className="w-full"><figure>
      <div className="mb-1 flex flex-wrap items-center gap-2 text-xs text-ink-600">
        <span data-testid="plot-range">MJD {fmtMjd(range.fromMjd)} – {fmtMjd(range.toMjd)}{zoomed ? ' (zoomed)' : ' (whole series)'}</span>
        <span className="ml-auto inline-flex gap-1">
          <button type="button" className="rounded border border-ink-200 px-2 py-0.5 hover:bg-paper-100" onClick={() => zoomAround((range.fromMjd + range.toMjd) / 2, 0.5)}>Zoom in</button>
          <button type="button" className="rounded border border-ink-200 px-2 py-0.5 hover:bg-paper-100 disabled:opacity-40" disabled={!zoomed} onClick={() => zoomAround((range.fromMjd + range.toMjd) / 2, 2)}>Zoom out</button>
          <button type="button" className="rounded border border-ink-200 px-2 py-0.5 hover:bg-paper-100 disabled:opacity-40" disabled={!zoomed} onClick={() => onRangeChange(null)}>Whole series</button>
        </span>
      </div>
      <svg ref={svgRef} width={width} height={height} viewBox={`0 0 ${width} ${height}`} role="img" aria-label={`${title}. Drag across a time range or use the wheel to zoom; keys + − ← → and 0.`}
        tabIndex={0} data-testid="time-series-plot" data-zoomed={zoomed ? 'true' : 'false'}
        className={`block touch-none select-none outline-none focus-visible:ring-2 focus-visible:ring-brass-400 ${loading ? 'opacity-70' : ''}`}
        onPointerDown={onPointerDown} onPointerMove={onPointerMove} onPointerUp={onPointerUp} onPointerCancel={() => setDrag(null)} onWheel={onWheel} onKeyDown={onKeyDown}>
        <title>{title}</title>
        <defs><clipPath id="ts-clip"><rect x={MARGIN.left} y={MARGIN.top} width={plotW} height={plotH} /></clipPath></defs>
        {yTicks.map((t) => (
          <g key={`y${t}`}>
            <line x1={MARGIN.left} x2={width - MARGIN.right} y1={y(t)} y2={y(t)} className="stroke-paper-200" />
            <text x={MARGIN.left - 6} y={y(t) + 4} textAnchor="end" className="fill-ink-500 text-[11px]" data-axis="y">{withMinus(yFormat(t))}</text>
          </g>
        ))}
        {xTicks.map((t) => (
          <g key={`x${t.x}`}>
            <line x1={t.x} x2={t.x} y1={MARGIN.top} y2={height - MARGIN.bottom} className="stroke-paper-200" />
            <text x={t.x} y={height - MARGIN.bottom + 16} textAnchor="middle" className="fill-ink-500 text-[11px]">{t.label}</text>
          </g>
        ))}
        <g clipPath="url(#ts-clip)">
          {showExtremes && <path d={extremes(buckets) ?? ''} className="fill-none stroke-ink-300" strokeWidth={0.8} strokeDasharray="2 2" data-testid="series-extremes" />}
          <path d={sdBand(buckets) ?? ''} className="fill-brass-300/60" data-testid="series-band" />
          <path d={meanLine(buckets) ?? ''} className="fill-none stroke-ink-800" strokeWidth={1.3} data-testid="series-mean" />
        </g>
        <rect x={MARGIN.left} y={MARGIN.top} width={plotW} height={plotH} className="fill-none stroke-ink-200" />
        {drag && <rect x={Math.min(drag.x0, drag.x1)} y={MARGIN.top} width={Math.abs(drag.x1 - drag.x0)} height={plotH} className="fill-ink-500/15 stroke-ink-500" strokeDasharray="4 2" data-testid="zoom-selection" />}
        <text x={(MARGIN.left + width - MARGIN.right) / 2} y={height - 8} textAnchor="middle" className="fill-ink-700 text-[12px]">{xLabel}</text>
        <text transform={`translate(16 ${(MARGIN.top + height - MARGIN.bottom) / 2}) rotate(-90)`} textAnchor="middle" className="fill-ink-700 text-[12px]">{yLabel}</text>
      </svg>
      <figcaption className="mt-1 flex flex-wrap gap-x-5 gap-y-1 text-xs text-ink-600">
        <span className="inline-flex items-center gap-1.5"><svg width="22" height="10" aria-hidden><line x1="0" x2="22" y1="5" y2="5" className="stroke-ink-800" strokeWidth={1.3} /></svg>mean y per time slice</span>
        <span className="inline-flex items-center gap-1.5"><svg width="22" height="10" aria-hidden><rect width="22" height="10" className="fill-brass-300/60" /></svg>±1 standard deviation of the samples in the slice</span>
        {showExtremes
          ? <span className="inline-flex items-center gap-1.5"><svg width="22" height="10" aria-hidden><rect x="0.5" y="0.5" width="21" height="9" className="fill-none stroke-ink-300" strokeDasharray="2 2" /></svg>smallest to largest sample</span>
          : <span>smallest and largest samples appear once you zoom in</span>}
        <span>{buckets.length} slices of {sliceLength(buckets.length ? (range.toMjd - range.fromMjd) / buckets.length : 0)}; {gaps} without valid samples (breaks)</span>
      </figcaption>
    </figure></div>
  );
}

function sliceLength(days: number): string {
  const s = days * 86_400;
  if (s < 120) return `${Number(s.toPrecision(2))} s`;
  if (s < 7200) return `${Number((s / 60).toPrecision(2))} min`;
  return `${Number((s / 3600).toPrecision(2))} h`;
}
