// Fast path for y = R/R0 − 1 over millions of rows: the subtraction R − R0 is done exactly on scaled BigInt
// integers (both are finite decimals), and only the tiny difference is rounded to float64 and divided by R0.
// Same definition as server/science/fractional-offset.ts (IEEE Std 1139-2008); that 50-digit decimal.js version
// stays the reference and the unit tests compare the two.

import { MAX_RATIO_SIGNIFICANT_DIGITS, parsePositiveDecimal, MAX_REFERENCE_SIGNIFICANT_DIGITS } from '../science/fractional-offset';

const DECIMAL = /^\+?(\d*)(?:\.(\d*))?(?:[eE]([+-]?\d{1,4}))?$/;

type Scaled = { mantissa: bigint; scale: number; digits: number };

function scaledDecimal(text: string): Scaled | null {
  const m = DECIMAL.exec(text);
  if (!m) return null;
  const intPart = m[1];
  const frac = m[2] ?? '';
  if (intPart.length === 0 && frac.length === 0) return null;
  const all = intPart + frac;
  let lead = 0;
  while (lead < all.length && all.charCodeAt(lead) === 48) lead++;
  let sig = all.length - lead;
  // Trailing zeros after a decimal point state resolution and count; in an integer they do not (as in the science module).
  if (m[2] === undefined) {
    let end = all.length;
    while (end > lead && all.charCodeAt(end - 1) === 48) end--;
    sig = end - lead;
  }
  const exp = m[3] ? Number(m[3]) : 0;
  return { mantissa: sig === 0 ? 0n : BigInt(all.slice(lead)), scale: frac.length - exp, digits: Math.max(sig, 1) };
}

const pow10Cache: bigint[] = [];
function pow10(n: number): bigint {
  return (pow10Cache[n] ??= 10n ** BigInt(n));
}

export type RatioConversion = { ok: true; y: number } | { ok: false; message: string };

/** Parses ratios against one reference ratio; returns a function from the ratio text to y (or a reason). */
export function createRatioConverter(referenceRatio: string): (ratioText: string) => RatioConversion {
  // Validate the reference once with the science module's rules (positive, ≤ 40 digits, sane exponent).
  const r0Dec = parsePositiveDecimal(referenceRatio, 'referenceRatio', MAX_REFERENCE_SIGNIFICANT_DIGITS);
  const r0 = scaledDecimal(r0Dec.toFixed())!;
  const r0Double = r0Dec.toNumber();
  return (text: string): RatioConversion => {
    const r = scaledDecimal(text);
    if (!r) return { ok: false, message: 'is not a decimal number' };
    if (r.digits > MAX_RATIO_SIGNIFICANT_DIGITS) return { ok: false, message: `has ${r.digits} significant digits; at most ${MAX_RATIO_SIGNIFICANT_DIGITS} are accepted` };
    if (r.mantissa === 0n) return { ok: false, message: 'must be a positive ratio' };
    if (r.scale > 60 || r.scale < -60) return { ok: false, message: 'order of magnitude is out of range' };
    const s = Math.max(r.scale, r0.scale);
    const diff = r.mantissa * pow10(s - r.scale) - r0.mantissa * pow10(s - r0.scale);
    // Decimal → double conversion of the exact difference is correctly rounded by the JS number parser.
    const diffDouble = diff === 0n ? 0 : Number.parseFloat(`${diff}e${-s}`);
    return { ok: true, y: diffDouble / r0Double };
  };
}
