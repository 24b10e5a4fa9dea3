// Fast path for y = R/R0 − 1 over millions of rows: the subtraction R − R0 is done exactly on scaled BigInt
// integers (both are finite decimals), and only the tiny difference is rounded to float64 and divided by R0.
// Same definition as server/science/fractional-offset.ts (IEEE Std 1139-2008); that 50-digit decimal.js version
// stays the reference and the unit tests compare the two.

import { MAX_RATIO_SIGNIFICANT_DIGITS, parsePositiveDecimal, MAX_REFERENCE_SIGNIFICANT_DIGITS } from '../science/fractional-offset';

const DECIMAL = /^\+?(\d*)(?:\.(\d*))?(?:[eE]([+-]?\d{1,4}))?$/;

type Scaled = { digits: string; scale: number; sig: number };

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
  return { digits: all.slice(lead), scale: frac.length - exp, sig: Math.max(sig, 1) };
}

export type RatioConversion = { ok: true; y: number } | { ok: false; message: string };

/** What `plain` returns for a cell that is not of the plain form or has too many digits. */
const NOT_PLAIN = Number.NaN;

/**
 * The converter: ratio text → y or a reason. Its `plain(bytes, from, limit, stop)` reads the ASCII cell that starts
 * at `from` and ends before `limit` or the first byte `stop` (then `plainEnd()` tells where), when it has
 * the plain form "ddd.ddd" within the accepted digits and returns y; NaN when it has not, or has too many digits
 * (the converter itself then gives the reason), so a caller falls back to the converter with the cell's text.
 */
export type RatioConverter = ((ratioText: string) => RatioConversion) & {
  plain: (bytes: Uint8Array, from: number, limit: number, stop: number) => number;
  plainEnd: () => number;
};

const SPLIT = 15; // digits per half: integers below 1e15 are exact in float64
// Literals are read correctly rounded, so these powers of ten are exact.
const POW10 = [1, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22];

/** Parses ratios against one reference ratio; returns a function from the ratio text to y (or a reason). */
export function createRatioConverter(referenceRatio: string): RatioConverter {
  // Validate the reference once with the science module's rules (positive, ≤ 40 digits, sane exponent).
  const r0Dec = parsePositiveDecimal(referenceRatio, 'referenceRatio', MAX_REFERENCE_SIGNIFICANT_DIGITS);
  const r0 = scaledDecimal(r0Dec.toFixed())!;
  const r0Double = r0Dec.toNumber();
  const r0Padded = new Map<number, { hi: number; lo: number; big: bigint; len: number }>();
  const r0At = (s: number) => {
    let v = r0Padded.get(s);
    if (!v) {
      const d = r0.digits + '0'.repeat(s - r0.scale);
      v = { hi: Number(d.slice(0, -SPLIT) || '0'), lo: Number(d.slice(-SPLIT)), big: BigInt(d || '0'), len: d.length };
      r0Padded.set(s, v);
    }
    return v;
  };
  // Fast path for the usual plain form "ddd.ddd" (no sign, no exponent): digits go straight into the two exact
  // halves without building strings. Anything else takes the general path below.
  let end = 0; // where the last cell read by `plain` ended
  let lastScale = -1;
  let lastR0: ReturnType<typeof r0At> | null = null;
  const plain = (text: Uint8Array, from: number, limit: number, stop: number): number => {
    let dot = -1;
    let first = -1; // offset of the first non-zero digit
    let i = from;
    for (; i < limit; i++) {
      const c = text[i];
      if (c === stop) break;
      if (c === 46) {
        if (dot >= 0) return NOT_PLAIN;
        dot = i - from;
      } else if (c < 48 || c > 57) return NOT_PLAIN;
      else if (first < 0 && c !== 48) first = i - from;
    }
    end = i;
    const n = i - from;
    if (dot <= 0 || dot === n - 1 || first < 0) return NOT_PLAIN;
    const fracDigits = n - dot - 1;
    const sig = n - first - (first < dot ? 1 : 0);
    if (sig > MAX_RATIO_SIGNIFICANT_DIGITS) return NOT_PLAIN; // the general path states the reason
    const s = Math.max(fracDigits, r0.scale);
    const pad = s - fracDigits;
    const total = n - 1 + pad; // digits of the scaled integer, leading zeros included
    if (s !== lastScale) {
      lastR0 = r0At(s);
      lastScale = s;
    }
    const b = lastR0!;
    if (total > 2 * SPLIT || b.len > 2 * SPLIT) return NOT_PLAIN;
    let hi = 0;
    let lo = 0;
    let j = 0;
    for (let i = 0; i < n; i++) {
      if (i === dot) continue;
      const digit = text[from + i] - 48;
      if (j < total - SPLIT) hi = hi * 10 + digit;
      else lo = lo * 10 + digit;
      j++;
    }
    for (let k = 0; k < pad; k++, j++) {
      if (j < total - SPLIT) hi *= 10;
      else lo *= 10;
    }
    const diff = (hi - b.hi) * 1e15 + (lo - b.lo);
    return diff === 0 ? 0 : s <= 22 ? diff / POW10[s] / r0Double : Number.parseFloat(`${diff}e${-s}`) / r0Double;
  };
  // a cell of plain ASCII up to 64 characters is copied into bytes for `plain`
  const scratch = new Uint8Array(64);
  const convert = (text: string): RatioConversion => {
    if (text.length <= scratch.length) {
      let ascii = true;
      for (let i = 0; i < text.length && ascii; i++) {
        const c = text.charCodeAt(i);
        scratch[i] = c;
        ascii = c < 128;
      }
      const fast = ascii ? plain(scratch, 0, text.length, -1) : NOT_PLAIN;
      if (!Number.isNaN(fast)) return { ok: true, y: fast };
    }
    const r = scaledDecimal(text);
    if (!r) return { ok: false, message: 'is not a decimal number' };
    if (r.sig > MAX_RATIO_SIGNIFICANT_DIGITS) return { ok: false, message: `has ${r.sig} significant digits; at most ${MAX_RATIO_SIGNIFICANT_DIGITS} are accepted` };
    if (r.digits.length === 0 || /^0+$/.test(r.digits)) return { ok: false, message: 'must be a positive ratio' };
    if (r.scale > 60 || r.scale < -60) return { ok: false, message: 'order of magnitude is out of range' };
    const s = Math.max(r.scale, r0.scale);
    const a = r.digits + '0'.repeat(s - r.scale);
    const b = r0At(s);
    let diff: number;
    if (a.length <= 2 * SPLIT && b.len <= 2 * SPLIT) {
      // Both halves subtract exactly; the sum rounds once, like converting the exact difference.
      diff = (Number(a.slice(0, -SPLIT) || '0') - b.hi) * 1e15 + (Number(a.slice(-SPLIT)) - b.lo);
    } else {
      const big = BigInt(a) - b.big;
      diff = big === 0n ? 0 : Number.parseFloat(big.toString());
    }
    // 10^s is exact in float64 up to s = 22; beyond, one more rounding of ≤ ½ ulp.
    const y = diff === 0 ? 0 : s >= 0 && s <= 22 ? diff / POW10[s] / r0Double : Number.parseFloat(`${diff}e${-s}`) / r0Double;
    return { ok: true, y };
  };
  return Object.assign(convert, { plain, plainEnd: () => end });
}
