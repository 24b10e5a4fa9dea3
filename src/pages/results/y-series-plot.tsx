import { scaleLinear } from 'd3-scale';
import { line } from 'd3-shape';
import type { ResultBody } from '../../../shared/results';

// Decimated y time series (bucket mean with min–max band) and the tidal part of y drawn around the corrected mean.

const M = { top: 12, right: 16, bottom: 44, left: 84 };

export function YSeriesPlot({ series, correctedMeanY, width = 900, height = 320 }: { series: ResultBody['timeSeries']; correctedMeanY: number; width?: number; height?: number }) {
  if (series.length < 2) return <p className="text-sm text-ink-500">Too few samples to plot.</p>;
  const t0 = Math.floor(series[0].mjd);
  const days = series.map((p) => p.mjd - t0);
  const lows = series.map((p) => p.yMin);
  const highs = series.map((p) => p.yMax);
  const model = series.map((p) => correctedMeanY + p.tideY);
  // Scale on the bucket means and the model: a few extreme samples must not flatten the picture.
  const means = series.map((p) => p.y);
  const sorted = [...means].sort((a, b) => a - b);
  const q = (f: number) => sorted[Math.min(sorted.length - 1, Math.max(0, Math.round(f * (sorted.length - 1))))];
  const spread = Math.max(q(0.99) - q(0.01), 1e-30);
  const yLo = Math.min(q(0.01), ...model) - 0.4 * spread;
  const yHi = Math.max(q(0.99), ...model) + 0.4 * spread;
  const x = scaleLinear().domain([days[0], days[days.length - 1]]).range([M.left, width - M.right]);
  const y = scaleLinear().domain([yLo, yHi]).range([height - M.bottom, M.top]).nice();
  const clampY = (v: number) => y(Math.min(Math.max(v, y.domain()[0]), y.domain()[1]));
  const meanPath = line<number>().x((_, i) => x(days[i])).y((v) => clampY(v))(means) ?? '';
  const modelPath = line<number>().x((_, i) => x(days[i])).y((v) => clampY(v))(model) ?? '';
  const band = series.map((_, i) => `${x(days[i])},${clampY(highs[i])}`).join(' ') + ' ' + series.map((_, i) => `${x(days[i])},${clampY(lows[i])}`).reverse().join(' ');
  const exp = Math.floor(Math.log10(Math.max(Math.abs(yLo), Math.abs(yHi))));
  const scale = 10 ** exp;
  return (
    <figure>
      <svg viewBox={`0 0 ${width} ${height}`} className="w-full" role="img" aria-label="Fractional offset y against time, with the tide correction">
        <title>Fractional offset y against time</title>
        {y.ticks(6).map((t) => (
          <g key={t}>
            <line x1={M.left} x2={width - M.right} y1={y(t)} y2={y(t)} className="stroke-paper-200" />
            <text x={M.left - 6} y={y(t) + 4} textAnchor="end" className="fill-ink-500 text-[11px]">{(t / scale).toFixed(3)}</text>
          </g>
        ))}
        {x.ticks(8).map((t) => (
          <g key={t}>
            <line x1={x(t)} x2={x(t)} y1={M.top} y2={height - M.bottom} className="stroke-paper-200" />
            <text x={x(t)} y={height - M.bottom + 16} textAnchor="middle" className="fill-ink-500 text-[11px]">{(t0 + t).toFixed(t % 1 ? 2 : 0)}</text>
          </g>
        ))}
        <polygon points={band} className="fill-ink-100" />
        <path d={meanPath} className="fill-none stroke-ink-700" strokeWidth={1.2} />
        <path d={modelPath} className="fill-none stroke-brass-600" strokeWidth={2} strokeDasharray="6 3" />
        <rect x={M.left} y={M.top} width={width - M.left - M.right} height={height - M.top - M.bottom} className="fill-none stroke-ink-200" />
        <text x={(M.left + width - M.right) / 2} y={height - 8} textAnchor="middle" className="fill-ink-700 text-[12px]">Epoch (MJD, UTC)</text>
        <text transform={`translate(16 ${(M.top + height - M.bottom) / 2}) rotate(-90)`} textAnchor="middle" className="fill-ink-700 text-[12px]">{`y (×10^${exp})`}</text>
      </svg>
      <figcaption className="mt-1 flex flex-wrap gap-4 text-xs text-ink-600">
        <span className="inline-flex items-center gap-1.5"><svg width="22" height="10" aria-hidden><rect width="22" height="10" className="fill-ink-100" /><line x1="0" x2="22" y1="5" y2="5" className="stroke-ink-700" /></svg>measured y: bucket mean and min–max ({series.length} buckets)</span>
        <span className="inline-flex items-center gap-1.5"><svg width="22" height="10" aria-hidden><line x1="0" x2="22" y1="5" y2="5" className="stroke-brass-600" strokeWidth={2} strokeDasharray="6 3" /></svg>tidal part of y, drawn around the corrected mean</span>
      </figcaption>
    </figure>
  );
}

/** The tidal part of y, y_tide(B) − y_tide(A), on its own scale (it is far below the measurement noise per bucket). */
export function TidePlot({ series, width = 900, height = 180 }: { series: ResultBody['timeSeries']; width?: number; height?: number }) {
  if (series.length < 2) return null;
  const t0 = Math.floor(series[0].mjd);
  const days = series.map((p) => p.mjd - t0);
  const tide = series.map((p) => p.tideY);
  const x = scaleLinear().domain([days[0], days[days.length - 1]]).range([M.left, width - M.right]);
  const y = scaleLinear().domain([Math.min(...tide), Math.max(...tide)]).range([height - M.bottom, M.top]).nice();
  const path = line<number>().x((_, i) => x(days[i])).y((v) => y(v))(tide) ?? '';
  return (
    <svg viewBox={`0 0 ${width} ${height}`} className="w-full" role="img" aria-label="Tidal part of y against time">
      <title>Tidal part of y against time</title>
      {y.ticks(4).map((t) => (
        <g key={t}>
          <line x1={M.left} x2={width - M.right} y1={y(t)} y2={y(t)} className="stroke-paper-200" />
          <text x={M.left - 6} y={y(t) + 4} textAnchor="end" className="fill-ink-500 text-[11px]">{(t * 1e18).toFixed(2)}</text>
        </g>
      ))}
      {x.ticks(8).map((t) => (
        <text key={t} x={x(t)} y={height - M.bottom + 16} textAnchor="middle" className="fill-ink-500 text-[11px]">{(t0 + t).toFixed(t % 1 ? 2 : 0)}</text>
      ))}
      <path d={path} className="fill-none stroke-brass-600" strokeWidth={1.5} />
      <rect x={M.left} y={M.top} width={width - M.left - M.right} height={height - M.top - M.bottom} className="fill-none stroke-ink-200" />
      <text x={(M.left + width - M.right) / 2} y={height - 8} textAnchor="middle" className="fill-ink-700 text-[12px]">Epoch (MJD, UTC)</text>
      <text transform={`translate(16 ${(M.top + height - M.bottom) / 2}) rotate(-90)`} textAnchor="middle" className="fill-ink-700 text-[12px]">y_tide (×10⁻¹⁸)</text>
    </svg>
  );
}
