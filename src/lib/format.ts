// Number presentation on screen: powers of ten as ×10⁻ⁿ with superscripts, a typographic minus, and uncertainties
// rounded to two significant digits with the value to the same decimal place (GUM, JCGM 100:2008, 7.2.6).

const SUPERSCRIPT: Record<string, string> = {
  '0': '⁰', '1': '¹', '2': '²', '3': '³', '4': '⁴', '5': '⁵', '6': '⁶', '7': '⁷', '8': '⁸', '9': '⁹', '-': '⁻',
};

export function superscript(n: number): string {
  return String(Math.trunc(n)).split('').map((c) => SUPERSCRIPT[c] ?? c).join('');
}

/** A hyphen in front of a number reads as a dash; the minus sign (U+2212) does not. */
export function withMinus(text: string): string {
  return text.replace(/^-/, '−');
}

/** Fixed decimals with a typographic minus. */
export function fixed(v: number, decimals: number): string {
  return withMinus(v.toFixed(decimals));
}

/** 6.55 × 10⁻¹⁴; zero stays 0, a missing value is a dash. Always in powers of ten, for fractional quantities. */
export function sci(v: number | null | undefined, significantDigits = 3): string {
  if (v === null || v === undefined) return '—';
  if (v === 0) return '0';
  if (!Number.isFinite(v)) return String(v);
  const [mantissa, exponent] = v.toExponential(significantDigits - 1).split('e');
  return `${withMinus(mantissa)} × 10${superscript(Number(exponent))}`;
}

/** Plain decimal between 10⁻³ and 10⁵, powers of ten outside (lengths, potentials, times). */
export function sig(v: number | null | undefined, significantDigits = 6): string {
  if (v === null || v === undefined) return '—';
  if (v === 0) return '0';
  const abs = Math.abs(v);
  if (abs >= 1e-3 && abs < 1e5) return withMinus(String(Number(v.toPrecision(significantDigits))));
  return sci(v, significantDigits);
}

/**
 * "12.345 ± 0.016" or, for tiny or huge quantities, "(6.50 ± 0.20) × 10⁻¹⁷": one shared power of ten, the value
 * rounded to the last digit of the two-digit uncertainty.
 */
export function valueAndUncertainty(value: number, uncertainty: number | null | undefined, significantDigits = 6): string {
  if (uncertainty === null || uncertainty === undefined || !(uncertainty > 0) || !Number.isFinite(uncertainty)) return sig(value, significantDigits);
  const magnitude = Math.max(Math.abs(value), uncertainty);
  if (magnitude < 1e-3 || magnitude >= 1e5) {
    const exponent = Math.floor(Math.log10(magnitude));
    const scale = 10 ** exponent;
    return `(${valueAndUncertainty(value / scale, uncertainty / scale)}) × 10${superscript(exponent)}`;
  }
  const decimals = Math.max(0, 1 - Math.floor(Math.log10(uncertainty)));
  return `${fixed(value, decimals)} ± ${uncertainty.toFixed(decimals)}`;
}

/** "2026-03-02 14:05" from an ISO 8601 timestamp (UTC, to the minute); the caller adds "UTC" where it reads better. */
export function isoMinute(iso: string): string {
  return iso ? iso.slice(0, 16).replace('T', ' ') : '—';
}

const pluralRules = new Intl.PluralRules('en');
/** "1 clock comparison", "3 clock comparisons" (CLDR plural rules via Intl.PluralRules). */
export function plural(n: number, singular: string, pluralForm = `${singular}s`): string {
  return `${n} ${pluralRules.select(n) === 'one' ? singular : pluralForm}`;
}
