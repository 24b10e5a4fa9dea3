import { scaleLog } from 'd3-scale';
import { line } from 'd3-shape';

// Log–log plots as SVG: Allan deviation with error bars and a white-FM τ^−1/2 guide, and plain log–log curves (planning).

export type LogLogSeries = {
  label: string;
  points: { x: number; y: number; low?: number | null; high?: number | null }[];
  kind: 'points' | 'line';
  /** Tailwind stroke/fill class pair, e.g. 'stroke-ink-700 fill-ink-700'. */
  colour: string;
  dashed?: boolean;
  marker?: 'circle' | 'square';
};

const MARGIN = { top: 12, right: 16, bottom: 44, left: 72 };

/** Ticks at the decades inside [lo, hi]; on a short range also at 2 and 5 times them (the 1–2–5 rule, common practice). */
function logTicks(lo: number, hi: number): number[] {
  const inside = (v: number) => v >= lo * 0.999 && v <= hi * 1.001;
  const decades: number[] = [];
  for (let e = Math.floor(Math.log10(lo)); e <= Math.ceil(Math.log10(hi)); e++) decades.push(10 ** e);
  const ones = decades.filter(inside);
  if (ones.length >= 3) return ones;
  const fine = decades.flatMap((d) => [d, 2 * d, 5 * d]).filter(inside);
  return fine.length >= 2 ? fine : decades.flatMap((d) => [1, 2, 3, 4, 5, 6, 7, 8, 9].map((m) => m * d)).filter(inside);
}

const SUPERSCRIPT: Record<string, string> = { '-': '⁻', 0: '⁰', 1: '¹', 2: '²', 3: '³', 4: '⁴', 5: '⁵', 6: '⁶', 7: '⁷', 8: '⁸', 9: '⁹' };

/** 10⁻¹⁶, or 2×10⁻¹⁶ between the decades. */
function powerLabel(v: number): string {
  const e = Math.floor(Math.log10(v) + 1e-9);
  const mantissa = Math.round(v / 10 ** e);
  const power = `10${String(e).split('').map((c) => SUPERSCRIPT[c] ?? c).join('')}`;
  return mantissa === 1 ? power : `${mantissa}×${power}`;
}

/** The data range widened by a small margin in log space, so points and error bars sit inside the frame. */
function fitLog(values: number[]): [number, number] {
  const lo = Math.min(...values);
  const hi = Math.max(...values);
  const margin = Math.max(0.06 * Math.log10(hi / lo), 0.05);
  return [lo / 10 ** margin, hi * 10 ** margin];
}

export function LogLogPlot({ series, xLabel, yLabel, title, width = 900, height = 340 }: {
  series: LogLogSeries[]; xLabel: string; yLabel: string; title: string; width?: number; height?: number;
}) {
  const all = series.flatMap((s) => s.points.flatMap((p) => [p.y, p.low ?? p.y, p.high ?? p.y]).filter((v) => v > 0 && Number.isFinite(v)));
  const xs = series.flatMap((s) => s.points.map((p) => p.x)).filter((v) => v > 0);
  if (all.length === 0 || xs.length === 0) return <p className="text-sm text-ink-500">Nothing to plot yet.</p>;
  const x = scaleLog().domain(fitLog(xs)).range([MARGIN.left, width - MARGIN.right]);
  const y = scaleLog().domain(fitLog(all)).range([height - MARGIN.bottom, MARGIN.top]);
  const path = line<{ x: number; y: number }>().x((p) => x(p.x)).y((p) => y(p.y));
  return (
    <figure>
      <svg viewBox={`0 0 ${width} ${height}`} className="w-full" role="img" aria-label={title}>
        <title>{title}</title>
        {logTicks(...(x.domain() as [number, number])).map((t) => (
          <g key={`x${t}`}>
            <line x1={x(t)} x2={x(t)} y1={MARGIN.top} y2={height - MARGIN.bottom} className="stroke-paper-200" />
            <text x={x(t)} y={height - MARGIN.bottom + 16} textAnchor="middle" className="fill-ink-500 text-[11px]">{powerLabel(t)}</text>
          </g>
        ))}
        {logTicks(...(y.domain() as [number, number])).map((t) => (
          <g key={`y${t}`}>
            <line x1={MARGIN.left} x2={width - MARGIN.right} y1={y(t)} y2={y(t)} className="stroke-paper-200" />
            <text x={MARGIN.left - 6} y={y(t) + 4} textAnchor="end" className="fill-ink-500 text-[11px]">{powerLabel(t)}</text>
          </g>
        ))}
        <rect x={MARGIN.left} y={MARGIN.top} width={width - MARGIN.left - MARGIN.right} height={height - MARGIN.top - MARGIN.bottom} className="fill-none stroke-ink-200" />
        <text x={(MARGIN.left + width - MARGIN.right) / 2} y={height - 8} textAnchor="middle" className="fill-ink-700 text-[12px]">{xLabel}</text>
        <text transform={`translate(16 ${(MARGIN.top + height - MARGIN.bottom) / 2}) rotate(-90)`} textAnchor="middle" className="fill-ink-700 text-[12px]">{yLabel}</text>
        {series.map((s) => {
          const pts = s.points.filter((p) => p.x > 0 && p.y > 0 && Number.isFinite(p.y));
          return (
            <g key={s.label} className={s.colour} data-series={s.label}>
              {s.kind === 'line' && <path d={path(pts) ?? ''} className="fill-none" strokeWidth={1.5} strokeDasharray={s.dashed ? '5 4' : undefined} />}
              {s.kind === 'points' && pts.map((p) => (
                <g key={p.x}>
                  {p.low != null && p.high != null && p.low > 0 && (
                    <line x1={x(p.x)} x2={x(p.x)} y1={y(p.low)} y2={y(p.high)} strokeWidth={1.2} />
                  )}
                  {s.marker === 'square'
                    ? <rect x={x(p.x) - 3} y={y(p.y) - 3} width={6} height={6} className="fill-white" strokeWidth={1.5} />
                    : <circle cx={x(p.x)} cy={y(p.y)} r={3.2} />}
                </g>
              ))}
            </g>
          );
        })}
      </svg>
      <figcaption className="mt-1 flex flex-wrap gap-4 text-xs text-ink-600">
        {series.map((s) => (
          <span key={s.label} className="inline-flex items-center gap-1.5">
            <svg width="22" height="10" aria-hidden className={s.colour}>
              {s.kind === 'line' ? <line x1="0" x2="22" y1="5" y2="5" strokeWidth={1.5} strokeDasharray={s.dashed ? '5 4' : undefined} />
                : s.marker === 'square' ? <rect x="8" y="2" width="6" height="6" className="fill-white" strokeWidth={1.5} /> : <circle cx="11" cy="5" r="3.2" />}
            </svg>
            {s.label}
          </span>
        ))}
      </figcaption>
    </figure>
  );
}

export type AllanPoint = { tauSeconds: number; adev: number | null; adevLow: number | null; adevHigh: number | null; mdev?: number | null };

/** Overlapping ADEV with its confidence interval, MDEV, and the white-FM τ^−1/2 line through the first ADEV point. */
export function AllanPlot({ points, title = 'Allan deviation' }: { points: AllanPoint[]; title?: string }) {
  const adev = points.filter((p) => p.adev !== null && p.adev > 0);
  const series: LogLogSeries[] = [
    { label: 'Overlapping Allan deviation (68 % interval)', kind: 'points', colour: 'stroke-ink-700 fill-ink-700', points: adev.map((p) => ({ x: p.tauSeconds, y: p.adev!, low: p.adevLow, high: p.adevHigh })) },
  ];
  const mdev = points.filter((p) => p.mdev != null && p.mdev > 0);
  if (mdev.length) series.push({ label: 'Modified Allan deviation', kind: 'points', marker: 'square', colour: 'stroke-brass-600 fill-brass-600', points: mdev.map((p) => ({ x: p.tauSeconds, y: p.mdev! })) });
  if (adev.length >= 2) {
    const first = adev[0];
    const last = adev[adev.length - 1];
    series.push({
      label: 'White frequency noise τ^−1/2 guide', kind: 'line', dashed: true, colour: 'stroke-ink-400 fill-none',
      points: [first, last].map((p) => ({ x: p.tauSeconds, y: first.adev! * Math.sqrt(first.tauSeconds / p.tauSeconds) })),
    });
  }
  return <LogLogPlot series={series} title={title} xLabel="Averaging time τ (s)" yLabel="Fractional frequency deviation" />;
}
