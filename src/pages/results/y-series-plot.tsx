import { scaleLinear } from 'd3-scale';
import { area, line } from 'd3-shape';
import { useEffect, useRef, useState, type KeyboardEvent, type PointerEvent, type WheelEvent } from 'react';
import type { ResultBody } from '../../../shared/results';
import { superscript } from '../../lib/format';

// Decimated y time series (bucket mean; the min–max band only once zoomed in, where it no longer drowns the signal)
// and the tidal part of y drawn around the corrected mean. Buckets without valid samples are nulls: every path breaks
// there, as on the campaign page, so gaps stay visible. ResultSeriesPlots zooms both plots into a time range (drag,
// wheel, buttons, keyboard + − ← → 0) within the buckets stored with the result.

const M = { top: 12, right: 16, bottom: 44, left: 84 };

type Point = ResultBody['timeSeries'][number];
type Filled = Point & { y: number; yMin: number; yMax: number; tideY: number };
const isFilled = (p: Point): p is Filled => p.y !== null && p.yMin !== null && p.yMax !== null && p.tideY !== null;

function timeAxis(series: Point[], width: number) {
  const t0 = Math.floor(series[0].mjd);
  const x = scaleLinear().domain([series[0].mjd - t0, series[series.length - 1].mjd - t0]).range([M.left, width - M.right]);
  return { t0, x, at: (p: Point) => x(p.mjd - t0) };
}

type Range = { from: number; to: number };
type ZoomHandlers = { zoomed: boolean; onSelect: (r: Range) => void; onZoom: (centre: number, factor: number) => void; onPan: (fraction: number) => void; onReset: () => void };

/** Both result plots over one time range, zoomable; the range is kept to the stored buckets (at least 3 of them). */
export function ResultSeriesPlots({ series, correctedMeanY }: { series: ResultBody['timeSeries']; correctedMeanY: number }) {
  const [range, setRange] = useState<Range | null>(null);
  if (series.length < 2) return <YSeriesPlot series={series} correctedMeanY={correctedMeanY} />;
  const full: Range = { from: series[0].mjd, to: series[series.length - 1].mjd };
  const fullSpan = full.to - full.from;
  const minSpan = Math.min(fullSpan, (fullSpan / (series.length - 1)) * 3);
  const shownRange = range ?? full;
  const clamp = (from: number, to: number): Range | null => {
    const span = Math.max(minSpan, Math.min(to - from, fullSpan));
    if (span >= fullSpan * 0.999) return null;
    const start = Math.min(Math.max(from, full.from), full.to - span);
    return { from: start, to: start + span };
  };
  const zoom: ZoomHandlers = {
    zoomed: range !== null,
    onSelect: (r) => setRange(clamp(r.from, r.to)),
    onZoom: (centre, factor) => setRange(clamp(centre - (centre - shownRange.from) * factor, centre + (shownRange.to - centre) * factor)),
    onPan: (fraction) => {
      const shift = (shownRange.to - shownRange.from) * fraction;
      setRange(clamp(shownRange.from + shift, shownRange.to + shift));
    },
    onReset: () => setRange(null),
  };
  // The buckets inside the range and one on each side, so the lines reach the plot's edges.
  const first = Math.max(0, series.findIndex((p) => p.mjd >= shownRange.from) - 1);
  const after = series.findIndex((p) => p.mjd > shownRange.to);
  const shown = range ? series.slice(first, after < 0 ? series.length : after + 1) : series;
  const centre = (shownRange.from + shownRange.to) / 2;
  return (
    <div>
      <div className="mb-1 flex flex-wrap items-center justify-between gap-2 text-xs text-ink-600">
        <span data-testid="y-series-range">MJD {shownRange.from.toFixed(4)} – {shownRange.to.toFixed(4)}{range ? ' (zoomed)' : ' (whole series)'}</span>
        <span className="flex gap-1">
          <button type="button" className="rounded border border-paper-300 px-2 py-0.5 hover:bg-paper-100" onClick={() => zoom.onZoom(centre, 0.5)}>Zoom in</button>
          <button type="button" className="rounded border border-paper-300 px-2 py-0.5 hover:bg-paper-100 disabled:opacity-50" disabled={!range} onClick={() => zoom.onZoom(centre, 2)}>Zoom out</button>
          <button type="button" className="rounded border border-paper-300 px-2 py-0.5 hover:bg-paper-100 disabled:opacity-50" disabled={!range} onClick={zoom.onReset}>Whole series</button>
        </span>
      </div>
      <YSeriesPlot series={shown} correctedMeanY={correctedMeanY} zoom={zoom} />
      <h3 className="mt-4 text-sm font-medium text-ink-700">Tide correction alone</h3>
      <TidePlot series={shown} />
    </div>
  );
}

export function YSeriesPlot({ series, correctedMeanY, width = 900, height = 320, zoom }: { series: ResultBody['timeSeries']; correctedMeanY: number; width?: number; height?: number; zoom?: ZoomHandlers }) {
  const [drag, setDrag] = useState<{ x0: number; x1: number } | null>(null);
  const svgRef = useRef<SVGSVGElement>(null);
  // The wheel zooms the plot, not the page, while the pointer is over it.
  useEffect(() => {
    const el = svgRef.current;
    if (!el || !zoom) return;
    const stop = (ev: globalThis.WheelEvent) => ev.preventDefault();
    el.addEventListener('wheel', stop, { passive: false });
    return () => el.removeEventListener('wheel', stop);
  }, [zoom]);
  const filled = series.filter(isFilled);
  if (filled.length < 2) return <p className="text-sm text-ink-500">Too few samples to plot.</p>;
  const { t0, x, at } = timeAxis(series, width);
  const model = filled.map((p) => correctedMeanY + p.tideY);
  // Scale on the bucket means and the model: a few extreme samples must not flatten the picture.
  const sorted = filled.map((p) => p.y).sort((a, b) => a - b);
  const q = (f: number) => sorted[Math.min(sorted.length - 1, Math.max(0, Math.round(f * (sorted.length - 1))))];
  const spread = Math.max(q(0.99) - q(0.01), 1e-30);
  const yLo = Math.min(q(0.01), ...model) - 0.4 * spread;
  const yHi = Math.max(q(0.99), ...model) + 0.4 * spread;
  const y = scaleLinear().domain([yLo, yHi]).range([height - M.bottom, M.top]).nice();
  const clampY = (v: number) => y(Math.min(Math.max(v, y.domain()[0]), y.domain()[1]));
  const defined = (p: Point) => isFilled(p);
  const meanPath = line<Point>().defined(defined).x(at).y((p) => clampY(p.y!))(series) ?? '';
  const modelPath = line<Point>().defined(defined).x(at).y((p) => clampY(correctedMeanY + p.tideY!))(series) ?? '';
  const band = area<Point>().defined(defined).x(at).y0((p) => clampY(p.yMin!)).y1((p) => clampY(p.yMax!))(series) ?? '';
  const exp = Math.floor(Math.log10(Math.max(Math.abs(yLo), Math.abs(yHi))));
  const scale = 10 ** exp;
  // Ticks in the scaled unit, formatted by d3 to the decimals the step needs (no "5.920").
  const yScaled = scaleLinear().domain([y.domain()[0] / scale, y.domain()[1] / scale]);
  const yTickFormat = yScaled.tickFormat(6);
  const xTickFormat = x.tickFormat(8, 'f');
  const gaps = series.length - filled.length;
  const showBand = zoom?.zoomed ?? true;
  const svgX = (e: { clientX: number; currentTarget: Element }) => {
    const rect = e.currentTarget.getBoundingClientRect();
    return Math.min(Math.max(((e.clientX - rect.left) / rect.width) * width, M.left), width - M.right);
  };
  const mjdAt = (sx: number) => t0 + x.invert(sx);
  const handlers = zoom ? {
    tabIndex: 0,
    onPointerDown: (e: PointerEvent<SVGSVGElement>) => {
      if (e.button !== 0) return;
      e.currentTarget.setPointerCapture(e.pointerId);
      const sx = svgX(e);
      setDrag({ x0: sx, x1: sx });
    },
    onPointerMove: (e: PointerEvent<SVGSVGElement>) => drag && setDrag({ ...drag, x1: svgX(e) }),
    onPointerUp: () => {
      if (drag && Math.abs(drag.x1 - drag.x0) > 6) zoom.onSelect({ from: mjdAt(Math.min(drag.x0, drag.x1)), to: mjdAt(Math.max(drag.x0, drag.x1)) });
      setDrag(null);
    },
    onWheel: (e: WheelEvent<SVGSVGElement>) => e.deltaY && zoom.onZoom(mjdAt(svgX(e)), e.deltaY < 0 ? 0.8 : 1.25),
    onKeyDown: (e: KeyboardEvent<SVGSVGElement>) => {
      const mid = (mjdAt(M.left) + mjdAt(width - M.right)) / 2;
      const actions = new Map<string, () => void>([
        ['+', () => zoom.onZoom(mid, 0.5)], ['=', () => zoom.onZoom(mid, 0.5)], ['-', () => zoom.onZoom(mid, 2)],
        ['ArrowLeft', () => zoom.onPan(-0.25)], ['ArrowRight', () => zoom.onPan(0.25)], ['0', zoom.onReset], ['Home', zoom.onReset],
      ]);
      const act = actions.get(e.key);
      if (act) {
        e.preventDefault();
        act();
      }
    },
  } : {};
  return (
    <figure>
      <svg ref={svgRef} viewBox={`0 0 ${width} ${height}`} className={`w-full ${zoom ? 'cursor-crosshair touch-none select-none focus:outline-2 focus:outline-brass-500' : ''}`} role="img" aria-label="Fractional offset y against time, with the tide correction" data-testid="y-series-plot" {...handlers}>
        <title>Fractional offset y against time</title>
        {yScaled.ticks(6).map((t) => (
          <g key={t}>
            <line x1={M.left} x2={width - M.right} y1={y(t * scale)} y2={y(t * scale)} className="stroke-paper-200" />
            <text x={M.left - 6} y={y(t * scale) + 4} textAnchor="end" className="fill-ink-500 text-[11px]">{yTickFormat(t).replace(/^[-−]/, '−')}</text>
          </g>
        ))}
        {x.ticks(8).map((t) => (
          <g key={t}>
            <line x1={x(t)} x2={x(t)} y1={M.top} y2={height - M.bottom} className="stroke-paper-200" />
            <text x={x(t)} y={height - M.bottom + 16} textAnchor="middle" className="fill-ink-500 text-[11px]">{xTickFormat(t0 + t)}</text>
          </g>
        ))}
        {showBand && <path d={band} className="fill-ink-100" data-testid="y-series-band" />}
        {drag && <rect x={Math.min(drag.x0, drag.x1)} y={M.top} width={Math.abs(drag.x1 - drag.x0)} height={height - M.top - M.bottom} className="fill-brass-500/20 stroke-brass-600" />}
        <path d={meanPath} className="fill-none stroke-ink-700" strokeWidth={1.2} data-testid="y-series-mean" />
        <path d={modelPath} className="fill-none stroke-brass-600" strokeWidth={2} strokeDasharray="6 3" />
        <rect x={M.left} y={M.top} width={width - M.left - M.right} height={height - M.top - M.bottom} className="fill-none stroke-ink-200" />
        <text x={(M.left + width - M.right) / 2} y={height - 8} textAnchor="middle" className="fill-ink-700 text-[12px]">Epoch (MJD, UTC)</text>
        <text transform={`translate(16 ${(M.top + height - M.bottom) / 2}) rotate(-90)`} textAnchor="middle" className="fill-ink-700 text-[12px]">{`y (×10${superscript(exp)})`}</text>
      </svg>
      <figcaption className="mt-1 flex flex-wrap gap-4 text-xs text-ink-600">
        <span className="inline-flex items-center gap-1.5" data-testid="y-series-caption"><svg width="22" height="10" aria-hidden>{showBand && <rect width="22" height="10" className="fill-ink-100" />}<line x1="0" x2="22" y1="5" y2="5" className="stroke-ink-700" /></svg>measured y: bucket mean{showBand ? ' and min–max' : ''} ({series.length} buckets; lines break at the {gaps} without valid samples{zoom && !zoom.zoomed ? '; the min–max band appears once zoomed in' : ''})</span>
        {zoom && <span>Zoom: drag across a time range, the wheel, the buttons or + − ← → 0.</span>}
        <span className="inline-flex items-center gap-1.5"><svg width="22" height="10" aria-hidden><line x1="0" x2="22" y1="5" y2="5" className="stroke-brass-600" strokeWidth={2} strokeDasharray="6 3" /></svg>tidal part of y, drawn around the corrected mean</span>
      </figcaption>
    </figure>
  );
}

/** The tidal part of y, y_tide(B) − y_tide(A), on its own scale (it is far below the measurement noise per bucket). */
export function TidePlot({ series, width = 900, height = 180 }: { series: ResultBody['timeSeries']; width?: number; height?: number }) {
  const filled = series.filter(isFilled);
  if (filled.length < 2) return null;
  const { t0, x, at } = timeAxis(series, width);
  const tide = filled.map((p) => p.tideY);
  const y = scaleLinear().domain([Math.min(...tide), Math.max(...tide)]).range([height - M.bottom, M.top]).nice();
  const path = line<Point>().defined(isFilled).x(at).y((p) => y(p.tideY!))(series) ?? '';
  const tideTickFormat = scaleLinear().domain([y.domain()[0] * 1e18, y.domain()[1] * 1e18]).tickFormat(4);
  return (
    <svg viewBox={`0 0 ${width} ${height}`} className="w-full" role="img" aria-label="Tidal part of y against time" data-testid="tide-plot">
      <title>Tidal part of y against time</title>
      {y.ticks(4).map((t) => (
        <g key={t}>
          <line x1={M.left} x2={width - M.right} y1={y(t)} y2={y(t)} className="stroke-paper-200" />
          <text x={M.left - 6} y={y(t) + 4} textAnchor="end" className="fill-ink-500 text-[11px]">{tideTickFormat(t * 1e18).replace(/^[-−]/, '−')}</text>
        </g>
      ))}
      {x.ticks(8).map((t) => (
        <text key={t} x={x(t)} y={height - M.bottom + 16} textAnchor="middle" className="fill-ink-500 text-[11px]">{x.tickFormat(8, 'f')(t0 + t)}</text>
      ))}
      <path d={path} className="fill-none stroke-brass-600" strokeWidth={1.5} />
      <rect x={M.left} y={M.top} width={width - M.left - M.right} height={height - M.top - M.bottom} className="fill-none stroke-ink-200" />
      <text x={(M.left + width - M.right) / 2} y={height - 8} textAnchor="middle" className="fill-ink-700 text-[12px]">Epoch (MJD, UTC)</text>
      <text transform={`translate(16 ${(M.top + height - M.bottom) / 2}) rotate(-90)`} textAnchor="middle" className="fill-ink-700 text-[12px]">y_tide (×10⁻¹⁸)</text>
    </svg>
  );
}
