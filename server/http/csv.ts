// CSV writing for every export. Cells follow RFC 4180 (quotes around a cell holding a comma, quote or line end;
// quotes doubled). Text that a spreadsheet would run as a formula — beginning with =, +, -, @, tab or carriage
// return — is prefixed with a single quote and quoted (OWASP, "CSV Injection"). Numbers, and text that is exactly a
// decimal number such as "-8.98755", stay as they are so the export still reads back as numbers.

const FORMULA_START = /^[=+\-@\t\r]/;
const PLAIN_NUMBER = /^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$/;

export function csvCell(value: string | number | boolean | null | undefined): string {
  if (value === null || value === undefined) return '';
  if (typeof value !== 'string') return String(value);
  if (FORMULA_START.test(value) && !PLAIN_NUMBER.test(value)) return `"'${value.replace(/"/g, '""')}"`;
  return /[",\r\n]/.test(value) ? `"${value.replace(/"/g, '""')}"` : value;
}

export function csvLine(cells: readonly (string | number | boolean | null | undefined)[]): string {
  return cells.map(csvCell).join(',');
}
