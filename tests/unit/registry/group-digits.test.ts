import { describe, expect, it } from 'vitest';
import { groupDigits } from '../../../src/pages/registry/registry-ui';

// Digit grouping for display: SI Brochure (9th ed., 2019) §5.4.4 — digits may be divided into groups of three by
// a thin space on either side of the decimal marker. The examples are the CIPM 2009 list values (Recommendation 2).
const NNBSP = '\u202f';
const spaced = (s: string) => s.replaceAll(' ', NNBSP);

describe('groupDigits', () => {
  it('groups the integer part from the decimal marker leftwards and the fraction rightwards', () => {
    expect(groupDigits('429228004229873.7')).toBe(spaced('429 228 004 229 873.7'));
    expect(groupDigits('642121496772657')).toBe(spaced('642 121 496 772 657'));
    expect(groupDigits('9192631770')).toBe(spaced('9 192 631 770'));
    expect(groupDigits('1.0000000000000000012')).toBe(spaced('1.000 000 000 000 000 001 2'));
  });
  it('is display only: removing the spaces gives back the API string; non-decimals pass through', () => {
    expect(groupDigits('429228004229872.99').replaceAll(NNBSP, '')).toBe('429228004229872.99');
    expect(groupDigits('4.2e14')).toBe('4.2e14');
    expect(groupDigits('873')).toBe('873');
  });
});
