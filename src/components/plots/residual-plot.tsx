import { scaleLinear } from 'd3-scale';

// A dot plot of test statistics (standardised residuals w, or Eₙ) per item, with the critical value as dashed lines.
// Beyond the critical value an item is drawn as a filled diamond in the "disagree" colour and its label is bold,
// so the verdict never rests on colour alone.

export type ResidualItem = { id: string; label: string; value: number | null; onClick?: () => void };

/** About 6.2 px per character at 11 px sans-serif (common practice for a fixed estimate without measuring text). */
const CHAR_PX = 6.2;
const MAX_LABEL_CHARS = 64;

/** Splits a label that is too long for one line at the space nearest its middle (two lines at most, never cut). */
export function wrapLabel(label: string, maxChars: number): string[] {
  if (label.length <= maxChars) return [label];
  const mid = label.length / 2;
  let best = -1;
  for (let i = 0; i < label.length; i++) if (label[i] === ' ' && (best < 0 || Math.abs(i - mid) < Math.abs(best - mid))) best = i;
  return best < 0 ? [label] : [label.slice(0, best), label.slice(best + 1)];
}

export function ResidualPlot({ items, critical, axisLabel, title }: { items: ResidualItem[]; critical: number; axisLabel: string; title: string }) {
  const shown = items.filter((i) => i.value !== null);
  // The label column grows with the longest label; longer ones wrap onto a second line instead of being cut.
  const longest = Math.min(MAX_LABEL_CHARS, Math.max(8, ...shown.map((i) => i.label.length)));
  const lines = shown.map((i) => wrapLabel(i.label, MAX_LABEL_CHARS));
  const wrapped = lines.some((l) => l.length > 1);
  const rowH = wrapped ? 30 : 18;
  const labelW = Math.max(...lines.flat().map((l) => l.length), longest) * CHAR_PX + 16;
  const margin = { top: 28, right: 24, bottom: 40, left: Math.round(labelW) };
  const width = margin.left + 560;
  const height = margin.top + margin.bottom + Math.max(1, shown.length) * rowH;
  const maxAbs = Math.max(critical * 1.3, ...shown.map((i) => Math.abs(i.value!)));
  const x = scaleLinear().domain([-maxAbs, maxAbs]).range([margin.left, width - margin.right]).nice();
  const ticks = x.ticks(8);
  return (
    <svg role="img" aria-label={title} viewBox={`0 0 ${width} ${height}`} className="w-full max-w-5xl font-sans text-[11px]">
      <title>{title}</title>
      {ticks.map((t) => (
        <g key={t}>
          <line x1={x(t)} x2={x(t)} y1={margin.top - 6} y2={height - margin.bottom} className="stroke-paper-200" />
          <text x={x(t)} y={height - margin.bottom + 14} textAnchor="middle" className="fill-ink-500">{t}</text>
        </g>
      ))}
      {[-critical, critical].map((c) => (
        <g key={c}>
          <line x1={x(c)} x2={x(c)} y1={margin.top - 10} y2={height - margin.bottom} strokeDasharray="5 3" className="stroke-disagree-600" />
          <text x={x(c)} y={margin.top - 14} textAnchor="middle" className="fill-disagree-800">{c > 0 ? `+${c.toFixed(2)}` : c.toFixed(2)}</text>
        </g>
      ))}
      <line x1={x(0)} x2={x(0)} y1={margin.top - 6} y2={height - margin.bottom} className="stroke-ink-300" />
      {shown.map((item, i) => {
        const y = margin.top + i * rowH + rowH / 2;
        const out = Math.abs(item.value!) > critical;
        const cx = x(item.value!);
        return (
          <g key={item.id} onClick={item.onClick} className={item.onClick ? 'cursor-pointer' : undefined}>
            <title>{`${item.label}: ${item.value!.toFixed(2)}`}</title>
            <text x={margin.left - 8} y={y + 4 - (lines[i].length - 1) * 6} textAnchor="end" className={out ? 'fill-disagree-800 font-semibold' : 'fill-ink-700'}>
              {lines[i].map((l, k) => <tspan key={k} x={margin.left - 8} dy={k === 0 ? 0 : 12}>{l}</tspan>)}
            </text>
            <line x1={x(0)} x2={cx} y1={y} y2={y} className={out ? 'stroke-disagree-600' : 'stroke-ink-300'} strokeWidth={2} />
            {out
              ? <path d={`M${cx},${y - 6} L${cx + 6},${y} L${cx},${y + 6} L${cx - 6},${y} Z`} className="fill-disagree-600" />
              : <circle cx={cx} cy={y} r={4} className="fill-white stroke-ink-700" strokeWidth={1.5} />}
          </g>
        );
      })}
      <text x={(margin.left + width - margin.right) / 2} y={height - 6} textAnchor="middle" className="fill-ink-700">{axisLabel}</text>
    </svg>
  );
}
