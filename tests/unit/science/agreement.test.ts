import { describe, expect, it } from 'vitest';
import { normalisedError } from '../../../server/science/agreement';
import { ScienceInputError } from '../../../server/science/errors';

// ISO 13528:2015 §9.7 / ISO/IEC 17043:2010 Annex B (clause numbers from memory); the worked numbers are computed from the formula.
describe('E_n', () => {
  it('x − X equal to the combined expanded uncertainty gives E_n = 1, which passes', () => {
    const r = normalisedError(10.5, 0.3, 10.0, 0.4);
    expect(r.combinedExpandedUncertainty).toBeCloseTo(0.5, 12);
    expect(r.en).toBeCloseTo(1.0, 12);
    expect(r.agreed).toBe(true);
  });

  it('fails above 1 and keeps the sign', () => {
    const r = normalisedError(9.0, 0.3, 10.0, 0.4);
    expect(r.en).toBeCloseTo(-2.0, 12);
    expect(r.agreed).toBe(false);
  });

  it('rejects U1 = U2 = 0 and non-finite inputs', () => {
    expect(() => normalisedError(1, 0, 2, 0)).toThrow(ScienceInputError);
    expect(() => normalisedError(NaN, 1, 2, 1)).toThrow(ScienceInputError);
    expect(() => normalisedError(1, -1, 2, 1)).toThrow(ScienceInputError);
    expect(normalisedError(1, 0, 1.5, 1).en).toBeCloseTo(-0.5, 12);
  });
});
