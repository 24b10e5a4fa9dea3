import Decimal from 'decimal.js';
import { describe, expect, it } from 'vitest';
import { fractionalOffset } from '../../../server/science/fractional-offset';
import { createRatioConverter } from '../../../server/uploads/ratio-to-offset';

// The fast path y = R/R0 − 1 used for uploads against two references: decimal.js at 60 digits (a general
// arbitrary-precision library from npm, rounded once to float64) and the project's 50-digit science module.
const D = Decimal.clone({ precision: 60 });
const exact = (r: string, r0: string) => new D(r).div(new D(r0)).minus(1).toNumber();
const ulp = (x: number) => (x === 0 ? Number.MIN_VALUE : 2 ** (Math.floor(Math.log2(Math.abs(x))) - 52));

describe('createRatioConverter', () => {
  it('keeps the last of 21 significant digits (reference ratio 1): correctly rounded y', () => {
    const toY = createRatioConverter('1');
    for (const r of ['1.00000000000000001234', '0.99999999999999998766', '1.00000000000000000001', '1.0000000000000000000', '1.00000000000005899999']) {
      const got = toY(r);
      expect(got.ok).toBe(true);
      if (got.ok) expect(got.y).toBe(exact(r, '1'));
    }
    const y = toY('1.00000000000000001234');
    expect(y.ok && y.y).toBe(1.234e-17);
  });

  it('agrees with decimal.js within 2 ulp of y for a 34-digit inter-species reference ratio', () => {
    // ν(Yb⁺ E3)/ν(Sr) from the CIPM 2009 values (Recommendation 2), as ratioOfFrequencies would give it
    const r0 = new D('642121496772657').div('429228004229873.7').toSignificantDigits(34).toString();
    const toY = createRatioConverter(r0);
    let seed = 99;
    for (let i = 0; i < 2000; i++) {
      seed = (seed * 16807) % 2147483647;
      const y = (seed / 2147483647 - 0.5) * 2e-15;
      const r = new D(r0).times(new D(1).plus(y)).toSignificantDigits(21).toString();
      const got = toY(r);
      expect(got.ok).toBe(true);
      const want = exact(r, r0);
      if (got.ok) expect(Math.abs(got.y - want)).toBeLessThanOrEqual(2 * ulp(want));
    }
  });

  it('agrees with decimal.js within 2 ulp for a short reference ratio (plain-digit fast path)', () => {
    const r0 = '1.2345678';
    const toY = createRatioConverter(r0);
    let seed = 4242;
    for (let i = 0; i < 2000; i++) {
      seed = (seed * 16807) % 2147483647;
      const r = new D(r0).times(new D(1).plus((seed / 2147483647 - 0.5) * 4e-15)).toSignificantDigits(21).toFixed();
      const got = toY(r);
      const want = exact(r, r0);
      expect(got.ok && Math.abs(got.y - want)).toBeLessThanOrEqual(2 * ulp(want));
    }
  });

  it('matches the science module fractionalOffset on exponent notation and integers', () => {
    const toY = createRatioConverter('1.5');
    for (const r of ['1.5000000000000001e0', '15000000000000000002e-19', '1.50000000000000000']) {
      const got = toY(r);
      const ref = fractionalOffset(r, '1.5');
      expect(got.ok && Math.abs(got.y - ref.y)).toBeLessThanOrEqual(2 * ulp(ref.y));
    }
  });

  it('refuses more than 21 significant digits, signs, zero and non-numbers', () => {
    const toY = createRatioConverter('1');
    expect(toY('1.000000000000000000001')).toEqual({ ok: false, message: expect.stringMatching(/22 significant digits/) });
    expect(toY('-1.0').ok).toBe(false);
    expect(toY('0.000').ok).toBe(false);
    expect(toY('NaN').ok).toBe(false);
    expect(toY('1,0').ok).toBe(false);
    // leading zeros do not count as significant (common practice)
    expect(toY('0001.00000000000000000012').ok).toBe(true);
  });
});
