import type { CertificateSnapshot } from './certificate-snapshot';

// The result table embedded in the certificate as CSV (RFC 4180: comma-separated, CRLF line ends, fields with
// commas or quotes quoted), one row per stated quantity, uncertainty and unit in their own columns.

function field(v: string | number | boolean): string {
  const s = String(v);
  return /[",\r\n]/.test(s) ? `"${s.replace(/"/g, '""')}"` : s;
}

export function resultCsv(s: CertificateSnapshot): string {
  const rows: (string | number | boolean)[][] = [
    ['certificate', 'quantity', 'value', 'unit', 'expanded_uncertainty', 'coverage_factor', 'standard_uncertainty', 'note'],
    [s.certificateNumber, 'measured_frequency_ratio', s.measuredRatio, '1', '', '', '', `clock B / clock A: ${s.clockB.name} / ${s.clockA.name}`],
    [s.certificateNumber, 'reference_frequency_ratio', s.referenceRatio.value, '1', '', '', '', s.referenceRatio.source],
    [s.certificateNumber, 'fractional_offset_y', s.fractionalOffset.y, '1', '', '', s.fractionalOffset.standardUncertainty, ''],
    [s.certificateNumber, 'geopotential_difference_deltaC', s.deltaC_m2s2.value, 'm2/s2', s.deltaC_m2s2.expandedUncertainty, s.deltaC_m2s2.coverageFactor, '', ''],
    [s.certificateNumber, 'height_difference_deltaH', s.deltaH_m.value, 'm', s.deltaH_m.expandedUncertainty, s.deltaH_m.coverageFactor, '', ''],
    [s.certificateNumber, 'geodetic_height_difference', s.geodeticComparison.deltaHGeodesy_m.value, 'm', s.geodeticComparison.deltaHGeodesy_m.expandedUncertainty, s.geodeticComparison.deltaHGeodesy_m.coverageFactor, '', s.geodeticComparison.source],
    [s.certificateNumber, 'normalised_error_En', s.geodeticComparison.En, '1', '', '', '', s.geodeticComparison.agreed ? 'agreed (|En| <= 1)' : 'not agreed (|En| > 1)'],
    [s.certificateNumber, 'combined_standard_uncertainty', s.budget.combinedStandardUncertainty, s.budget.outputUnit, '', '', s.budget.combinedStandardUncertainty, 'uncertainty budget total'],
    ...s.budget.rows.map((r) => [s.certificateNumber, `budget:${r.component}`, r.contribution, r.unit, '', '', r.standardUncertainty, `type ${r.type}, sensitivity ${r.sensitivity}`]),
  ];
  return rows.map((r) => r.map(field).join(',')).join('\r\n') + '\r\n';
}
