import Decimal from 'decimal.js';
import { describe, expect, it } from 'vitest';
import { fractionalOffset, ratioOfFrequencies } from '../../../server/science/fractional-offset';
import { ScienceInputError } from '../../../server/science/errors';

/** Exact y = R/R0 − 1 as a reduced fraction of BigInts from the decimal digits (common practice: exact rational arithmetic). */
function exactOffset(ratio: string, reference: string): { num: bigint; den: bigint } {
  const toFraction = (s: string): [bigint, bigint] => {
    const [int, frac = ''] = s.split('.');
    return [BigInt(int + frac), 10n ** BigInt(frac.length)];
  };
  const [rn, rd] = toFraction(ratio);
  const [qn, qd] = toFraction(reference);
  return { num: rn * qd - qn * rd, den: rd * qn };
}

describe('fractionalOffset', () => {
  it('keeps all 21 digits of a same-species ratio (independent decimal.js at 60 digits and exact BigInt)', () => {
    const ratio = '1.00000000000000001234'; // 21 significant digits
    const { y, yDecimal } = fractionalOffset(ratio);
    const D60 = Decimal.clone({ precision: 60 });
    expect(new D60(yDecimal).eq(new D60(ratio).minus(1))).toBe(true);
    const exact = exactOffset(ratio, '1');
    expect(exact.num).toBe(1234n);
    expect(exact.den).toBe(10n ** 20n);
    expect(y).toBe(1.234e-17);
  });

  it('handles an inter-species ratio against a 21-digit reference ratio', () => {
    // CIPM 2009 Rec. 2 frequencies of 87Sr and 171Yb+ E3 (CIPM 2009 Recommendation 2) give a realistic reference ratio.
    const reference = ratioOfFrequencies('429228004229873.7', '642121496772657');
    const D60 = Decimal.clone({ precision: 60 });
    expect(new D60(reference).minus(new D60('642121496772657').div('429228004229873.7')).abs().lt('1e-33')).toBe(true);
    const ratio = '1.49598361012342678901'; // 21 digits
    const { y, yDecimal } = fractionalOffset(ratio, '1.49598361012342678900');
    const exact = exactOffset(ratio, '1.49598361012342678900');
    const exactY = new D60(exact.num.toString()).div(exact.den.toString());
    expect(new D60(yDecimal).minus(exactY).abs().lt('1e-48')).toBe(true);
    expect(y).toBeCloseTo(exactY.toNumber(), 35);
    expect(Math.abs(y / exactY.toNumber() - 1)).toBeLessThan(1e-15);
  });

  it('rejects malformed input with a typed error naming the field (common practice)', () => {
    const bad = ['NaN', 'Infinity', '1e999', '1e-40', 'abc', '', '1.0000000000000000000001', '-1', '0', '0x10'];
    for (const value of bad) {
      expect(() => fractionalOffset(value), value).toThrow(ScienceInputError);
    }
    try {
      fractionalOffset('1', 'oops');
    } catch (error) {
      expect(error).toBeInstanceOf(ScienceInputError);
      expect((error as ScienceInputError).field).toBe('referenceRatio');
    }
  });
});
