import { describe, expect, it } from 'vitest';
import { csvCell, csvLine } from '../../../server/http/csv';

// OWASP, "CSV Injection" (owasp.org/www-community/attacks/CSV_Injection): a cell beginning with =, +, −, @,
// tab (0x09) or carriage return (0x0D) is read as a formula by spreadsheet programs. Prefix it with a single quote
// and wrap the cell in double quotes, doubling any double quote inside (RFC 4180 §2 items 5–7).
describe('CSV cells', () => {
  it.each([
    ['=HYPERLINK("http://evil.invalid","x")', `"'=HYPERLINK(""http://evil.invalid"",""x"")"`],
    ['+1+cmd|\' /C calc\'!A0', `"'+1+cmd|' /C calc'!A0"`],
    ['-2+3', `"'-2+3"`],
    ['@SUM(A1:A2)', `"'@SUM(A1:A2)"`],
    ['\t=1', `"'\t=1"`],
    ['\r=1', `"'\r=1"`],
  ])('neutralises %j', (text, expected) => {
    expect(csvCell(text)).toBe(expected);
  });

  it('leaves numbers (negative ones included) and plain text as they are', () => {
    expect(csvCell(-1.2345e-16)).toBe('-1.2345e-16');
    expect(csvCell('-8.98755')).toBe('-8.98755');
    expect(csvCell('1.00000000000006444321')).toBe('1.00000000000006444321');
    expect(csvCell('Saltmarsh Sr lattice')).toBe('Saltmarsh Sr lattice');
    expect(csvCell(null)).toBe('');
  });

  it('quotes separators, quotes and line ends (RFC 4180)', () => {
    expect(csvCell('a,b')).toBe('"a,b"');
    expect(csvCell('say "hi"')).toBe('"say ""hi"""');
    expect(csvCell('two\nlines')).toBe('"two\nlines"');
    expect(csvLine(['x', '=1', 2])).toBe(`x,"'=1",2`);
  });
});
