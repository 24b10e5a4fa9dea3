import { describe, expect, it } from 'vitest';
import { formatScientific, formatValueWithUncertainty, niceLinearTicks } from '../../../server/certificates/pdf/number-format';

describe('certificate number presentation', () => {
  it('states a value with its uncertainty as GUM (JCGM 100:2008) 7.2.4 does', () => {
    // GUM 7.2.4 example: m_S = (100.021 47 ± 0.000 79) g; 7.2.2: u_c = 0.35 mg on the same value.
    expect(formatValueWithUncertainty(100.02147, 0.00079)).toBe('100.02147 ± 0.00079');
    expect(formatValueWithUncertainty(100.02147, 0.00035)).toBe('100.02147 ± 0.00035');
    // GUM 7.2.6: the uncertainty keeps at most two significant digits and the value is rounded to match.
    expect(formatValueWithUncertainty(5886.1274, 0.7093)).toBe('5886.13 ± 0.71');
    expect(formatValueWithUncertainty(-0.04613, 0.0826)).toBe('−0.046 ± 0.083');
  });

  it('writes powers of ten with superscripts and a typographic minus (SI Brochure 9th ed. §5.4, clause from memory)', () => {
    expect(formatScientific(6.5492e-14, 5)).toBe('6.5492 × 10⁻¹⁴');
    expect(formatScientific(299_792_458 ** 2, 4)).toBe('8.988 × 10¹⁶');
    expect(formatScientific(-3.2e-18, 2)).toBe('−3.2 × 10⁻¹⁸');
    expect(formatScientific(0.05, 2)).toBe('0.050');
  });

  it('chooses 1–2–5 tick steps (common practice)', () => {
    expect(niceLinearTicks(0, 9.5, 5)).toEqual([0, 2, 4, 6, 8]);
    expect(niceLinearTicks(-6.2, 6.2, 5)).toEqual([-5, 0, 5]);
  });
});
