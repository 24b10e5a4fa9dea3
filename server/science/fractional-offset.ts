// Fractional frequency offset y = R / R0 − 1 from a measured frequency ratio R and a reference ratio R0,
// computed in 50-digit decimal arithmetic (decimal.js) because R carries up to 21 significant digits
// and float64 would lose the 1e-18 part. Definition of y: IEEE Std 1139-2008; CCTF recommended frequencies for R0.

import Decimal from 'decimal.js';
import { ScienceInputError } from './errors';

const Dec = Decimal.clone({ precision: 50, rounding: Decimal.ROUND_HALF_EVEN, toExpNeg: -60, toExpPos: 60 });

/** A measured ratio from a lab file: more digits than this are beyond any clock and suggest a malformed value. */
export const MAX_RATIO_SIGNIFICANT_DIGITS = 21;
/** Reference ratios may themselves be computed (ratioOfFrequencies), so they may carry more digits. */
export const MAX_REFERENCE_SIGNIFICANT_DIGITS = 40;
const MAX_ABS_EXPONENT = 30;
const DECIMAL_PATTERN = /^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d{1,4})?$/;

function significantDigits(text: string): number {
  const mantissa = text.replace(/^[+-]/, '').split(/[eE]/)[0];
  const digits = mantissa.replace('.', '').replace(/^0+/, '');
  // Trailing zeros after a decimal point are significant (they state resolution); in an integer they are not.
  const trimmed = mantissa.includes('.') ? digits : digits.replace(/0+$/, '');
  return Math.max(trimmed.length, 1);
}

/** Parses a positive decimal string into a 50-digit Decimal, or throws ScienceInputError naming `field`. */
export function parsePositiveDecimal(text: string, field: string, maxDigits = MAX_RATIO_SIGNIFICANT_DIGITS): Decimal {
  if (typeof text !== 'string' || !DECIMAL_PATTERN.test(text.trim())) {
    throw new ScienceInputError(field, 'must be a decimal number written as a string, e.g. "1.000000000000000012"');
  }
  const trimmed = text.trim();
  if (significantDigits(trimmed) > maxDigits) {
    throw new ScienceInputError(field, `has more than ${maxDigits} significant digits`);
  }
  const value = new Dec(trimmed);
  if (!value.isFinite() || value.lte(0)) {
    throw new ScienceInputError(field, 'must be a finite positive number');
  }
  const exponent = value.e;
  if (Math.abs(exponent) > MAX_ABS_EXPONENT) {
    throw new ScienceInputError(field, `order of magnitude outside 1e-${MAX_ABS_EXPONENT}…1e${MAX_ABS_EXPONENT}`);
  }
  return value;
}

export interface FractionalOffset {
  /** y as float64: |y| ~ 1e-16 keeps full relative precision once the subtraction is done in decimal. */
  y: number;
  /** y as a decimal string (up to 50 significant digits) for storage and audit. */
  yDecimal: string;
}

/** y = ratio / referenceRatio − 1. Both are decimal strings. */
export function fractionalOffset(ratio: string, referenceRatio = '1'): FractionalOffset {
  const r = parsePositiveDecimal(ratio, 'ratio');
  const r0 = parsePositiveDecimal(referenceRatio, 'referenceRatio', MAX_REFERENCE_SIGNIFICANT_DIGITS);
  const y = r.div(r0).minus(1);
  return { y: y.toNumber(), yDecimal: y.toString() };
}

/**
 * Reference ratio for clocks A and B from their recommended frequencies: R0 = ν_B / ν_A.
 * This is the same orientation as the measured ratio R = ν_B / ν_A, so y = R/R0 − 1 is B relative to A.
 * Returns 34 significant digits, well beyond the uncertainty of any recommended frequency.
 */
export function ratioOfFrequencies(frequencyA_Hz: string, frequencyB_Hz: string): string {
  const fA = parsePositiveDecimal(frequencyA_Hz, 'frequencyA_Hz', MAX_REFERENCE_SIGNIFICANT_DIGITS);
  const fB = parsePositiveDecimal(frequencyB_Hz, 'frequencyB_Hz', MAX_REFERENCE_SIGNIFICANT_DIGITS);
  return fB.div(fA).toSignificantDigits(34).toString();
}
