// Number presentation for certificates. Rounding the expanded uncertainty to two significant
// digits and the value to the same decimal place follows GUM (JCGM 100:2008) 7.2.6.

const SUPERSCRIPT: Record<string, string> = {
  '0': '⁰', '1': '¹', '2': '²', '3': '³', '4': '⁴', '5': '⁵', '6': '⁶', '7': '⁷', '8': '⁸', '9': '⁹', '-': '⁻',
};

export function superscriptInteger(n: number): string {
  return String(Math.trunc(n))
    .split('')
    .map((ch) => (Object.hasOwn(SUPERSCRIPT, ch) ? SUPERSCRIPT[ch] : ch))
    .join('');
}

/** Typographic minus so negative numbers do not read as hyphens. */
function withMinus(text: string): string {
  return text.replace(/^-/, '−');
}

/** 6.549 × 10⁻¹⁴ style; plain decimal for magnitudes between 1e-3 and 1e5. */
export function formatScientific(x: number, significantDigits = 3): string {
  if (x === 0) return '0';
  if (!Number.isFinite(x)) return String(x);
  const abs = Math.abs(x);
  if (abs >= 1e-3 && abs < 1e5) return withMinus(formatSignificant(x, significantDigits));
  const [mantissa, exponent] = x.toExponential(significantDigits - 1).split('e');
  return `${withMinus(mantissa)} × 10${superscriptInteger(Number(exponent))}`;
}

function formatSignificant(x: number, significantDigits: number): string {
  const decimals = Math.max(0, significantDigits - 1 - Math.floor(Math.log10(Math.abs(x))));
  return x.toFixed(Math.min(decimals, 20));
}

/** Decimal places that keep two significant digits of u (GUM 7.2.6). */
function decimalsForUncertainty(u: number): number {
  return Math.max(0, 1 - Math.floor(Math.log10(u)));
}

/** "5886.12 ± 0.45" — value rounded to the last digit of the two-digit uncertainty. */
export function formatValueWithUncertainty(value: number, uncertainty: number): string {
  if (uncertainty <= 0 || !Number.isFinite(uncertainty)) return withMinus(formatSignificant(value, 6));
  const decimals = decimalsForUncertainty(uncertainty);
  if (decimals > 12) {
    // Tiny quantities (fractional offsets) read better in one shared power of ten.
    const exponent = Math.floor(Math.log10(Math.abs(value) || uncertainty));
    const scale = 10 ** exponent;
    return `(${formatValueWithUncertainty(value / scale, uncertainty / scale)}) × 10${superscriptInteger(exponent)}`;
  }
  return `${withMinus(value.toFixed(decimals))} ± ${uncertainty.toFixed(decimals)}`;
}

export function formatFixed(x: number, decimals: number): string {
  return withMinus(x.toFixed(decimals));
}

/** Hex digests split into groups of 8 so they can be read aloud and compared by eye. */
export function groupHex(hex: string): string {
  return hex.replace(/(.{8})(?=.)/g, '$1 ');
}

/** Nice tick step for a linear axis (the 1–2–5 rule, common practice). */
export function niceLinearTicks(min: number, max: number, targetCount = 5): number[] {
  if (!(max > min)) return [min];
  const rawStep = (max - min) / targetCount;
  const magnitude = 10 ** Math.floor(Math.log10(rawStep));
  const residual = rawStep / magnitude;
  const step = (residual > 5 ? 10 : residual > 2 ? 5 : residual > 1 ? 2 : 1) * magnitude;
  const ticks: number[] = [];
  for (let t = Math.ceil(min / step) * step; t <= max + step * 1e-9; t += step) {
    ticks.push(Math.abs(t) < step * 1e-9 ? 0 : t);
  }
  return ticks;
}
