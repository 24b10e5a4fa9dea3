import { certificateStateLabels, type CertificateState } from '../../../shared/certificate-registry';
import { coverageText } from '../../../shared/number-text';

const styles: Record<CertificateState, { mark: string; cls: string }> = {
  valid: { mark: '✓', cls: 'bg-agree-100 text-agree-800' },
  superseded: { mark: '↻', cls: 'bg-paper-200 text-ink-700' },
  revoked: { mark: '⊘', cls: 'bg-disagree-100 text-disagree-800' },
};

/** State badge: a mark and a word, so colour is never the only cue. */
export function CertificateStateBadge({ state }: { state: CertificateState }) {
  const s = styles[state];
  return (
    <span className={`inline-flex items-center gap-1 rounded px-1.5 py-0.5 text-xs font-medium ${s.cls}`} data-state={state}>
      <span aria-hidden>{s.mark}</span>
      {certificateStateLabels[state]}
    </span>
  );
}

/** Expanded quantity as the certificate prints it: value ± U unit (k, and p and ν_eff where recorded). */
export function formatExpanded(q: { value: number; expandedUncertainty: number; coverageFactor: number; coverageProbability?: number; effectiveDegreesOfFreedom?: number | null }, unit: string): string {
  const decimals = q.expandedUncertainty > 0 ? Math.max(0, 1 - Math.floor(Math.log10(q.expandedUncertainty))) : 3;
  const coverage = q.coverageProbability !== undefined
    ? coverageText({ coverageFactor: q.coverageFactor, coverageProbability: q.coverageProbability, effectiveDegreesOfFreedom: q.effectiveDegreesOfFreedom ?? null })
    : `k = ${Number.isInteger(q.coverageFactor) ? q.coverageFactor : q.coverageFactor.toFixed(2)}`;
  return `${q.value.toFixed(decimals).replace(/^-/, '−')} ± ${q.expandedUncertainty.toFixed(decimals)} ${unit} (${coverage})`;
}
