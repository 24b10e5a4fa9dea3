import type { ReviewException } from '../../shared/campaigns';
import type { CertificateSnapshot } from '../../shared/certificates';
import type { ComparisonResultDto } from '../../shared/results';

// When a reviewer must write down why a campaign is acceptable anyway: no result, no geodetic comparison, an
// Eₙ outside |Eₙ| ≤ 1 (ISO 13528:2022, 9.7), an uptime below the installation's threshold, or a clock-ratio
// closure of a loop the campaign is part of that fails (|Eₙ| > 1; the stored closures, server/closures).

/** The parts of a stored result the review rules read. */
export type ResultForReview = Pick<ComparisonResultDto['result'], 'sideBySide' | 'geodesy' | 'samples'>;

export function reviewExceptions(result: ResultForReview | null, minUptimeFraction: number, noResultReason?: string, closures: readonly ReviewException[] = []): ReviewException[] {
  if (!result) return [{ code: 'no-result', text: `No result could be computed${noResultReason ? `: ${noResultReason}` : ''}.` }, ...closures];
  const out: ReviewException[] = [...closures];
  // A side-by-side campaign measures the offset between two clocks: no geodetic comparison is expected of it.
  if (result.sideBySide) {
    // nothing to compare with the levelling
  } else if (!result.geodesy) out.push({ code: 'no-comparison', text: 'The result holds no geodetic height difference, so no Eₙ can be stated.' });
  else if (!result.geodesy.agreed) out.push({ code: 'en-not-agreed', text: `Eₙ = ${result.geodesy.en.toFixed(2)}: clock and levelling do not agree (|Eₙ| > 1).` });
  const uptime = result.samples.uptimeFraction;
  if (uptime < minUptimeFraction) {
    out.push({ code: 'low-uptime', text: `Uptime ${(uptime * 100).toFixed(1)} % is below the ${(minUptimeFraction * 100).toFixed(0)} % this installation asks for.` });
  }
  return out;
}

/** The same rules on what a certificate states (it always has a geodetic comparison). */
export function certificationExceptions(body: Pick<CertificateSnapshot, 'geodeticComparison' | 'uptimeFraction'>, minUptimeFraction: number, closures: readonly ReviewException[] = []): ReviewException[] {
  const out: ReviewException[] = [...closures];
  if (!body.geodeticComparison.agreed) out.push({ code: 'en-not-agreed', text: `Eₙ = ${body.geodeticComparison.En.toFixed(2)}: clock and levelling do not agree (|Eₙ| > 1).` });
  if (body.uptimeFraction < minUptimeFraction) {
    out.push({ code: 'low-uptime', text: `Uptime ${(body.uptimeFraction * 100).toFixed(1)} % is below the ${(minUptimeFraction * 100).toFixed(0)} % this installation asks for.` });
  }
  return out;
}
