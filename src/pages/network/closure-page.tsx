import { Link, useParams } from 'react-router';
import { useClosure } from '../../api/closures';
import { Caution, EmptyState, Panel } from '../../components/ui';
import { describeError } from '../../lib/api-client';
import { day, sci } from './closures-table';
import { NetworkNav } from './network-nav';

export function ClosurePage() {
  const { id = '' } = useParams();
  const q = useClosure(id);
  if (q.isPending) return <p className="text-ink-500">Loading…</p>;
  if (q.isError) return <EmptyState title="This closure could not be loaded">{describeError(q.error)}</EmptyState>;
  const d = q.data;
  return (
    <>
      <h1>Closure {d.label}</h1>
      <NetworkNav />
      <Panel title="Result" actions={<span className="flex gap-3 text-sm"><a href={`/api/v1/network/closures/${d.id}/export.csv`}>CSV</a><a href={`/api/v1/network/closures/${d.id}/export.json`}>JSON</a></span>}>
        <p data-testid="closure-verdict" className={`mb-2 rounded-md border px-3 py-2 font-medium ${d.agreed ? 'border-agree-800' : 'border-l-4 border-disagree-600 bg-disagree-100'}`}>
          {d.agreed ? '✓ The loop closes' : '✕ The loop does not close'}: ε = {sci(d.closure)} ± {sci(d.expandedUncertainty)} (U, k = {d.coverageFactor.toFixed(2)},
          p = {(d.coverageProbability * 100).toFixed(2)} %{d.effectiveDegreesOfFreedom ? `, ν_eff = ${Math.floor(d.effectiveDegreesOfFreedom)}` : ''}), Eₙ = {d.en.toFixed(2)}
        </p>
        <dl className="grid grid-cols-[max-content_1fr] gap-x-4 text-sm">
          <dt>Common time</dt><dd>{day(d.commonStart)} – {day(d.commonEnd)}; {d.commonSamples} common slots of τ0 = {Number(d.tau0Seconds.toPrecision(6))} s</dd>
          <dt>Σ s·y</dt><dd>{sci(d.sumY, 3)} (u_stat = {d.statisticalUncertainty === null ? 'none' : sci(d.statisticalUncertainty)})</dd>
          <dt>Σ s·ln R0</dt><dd>{d.referenceRatioTerm === 0 ? '0 (reference ratios consistent)' : sci(d.referenceRatioTerm, 3)}</dd>
          <dt>u_c</dt><dd>{sci(d.standardUncertainty)} (dimensionless)</dd>
        </dl>
        {d.cautions.map((c) => <p key={c} className="mt-2 text-sm text-disagree-600">{c}</p>)}
      </Panel>
      <Panel title="Campaigns of the loop">
        <table className="w-full text-sm">
          <thead><tr className="border-b border-paper-200 text-left"><th>#</th><th>Campaign</th><th>Direction in the loop</th><th>Sign s</th><th className="text-right">mean y</th><th className="text-right">R0</th></tr></thead>
          <tbody>
            {d.legs.map((l) => (
              <tr key={l.campaignId} className="border-b border-paper-200">
                <td>{l.position}</td><td><Link to={`/campaigns/${l.campaignId}`}>{l.campaignName}</Link></td><td>{l.fromClock} → {l.toClock}</td>
                <td>{l.sign > 0 ? '+1' : '−1'}</td><td className="text-right">{sci(l.meanY, 4)}</td><td className="text-right">{l.referenceRatio}</td>
              </tr>
            ))}
          </tbody>
        </table>
      </Panel>
      <Panel title="Uncertainty budget (JCGM 100:2008)">
        <table className="w-full text-sm">
          <thead><tr className="border-b border-paper-200 text-left"><th>Input</th><th>Type</th><th className="text-right">u(xᵢ)</th><th className="text-right">cᵢ</th><th className="text-right">|cᵢ|·u(xᵢ)</th><th>Note</th></tr></thead>
          <tbody>
            {d.budget.map((b) => (
              <tr key={b.component} className="border-b border-paper-200">
                <td>{b.component}</td><td>{b.type}</td><td className="whitespace-nowrap text-right">{sci(b.standardUncertainty)}</td><td className="text-right">{b.sensitivity}</td>
                <td className="whitespace-nowrap text-right">{b.contribution === 0 ? '0 (cancels)' : sci(b.contribution)}</td><td className="text-xs text-ink-600">{b.note}</td>
              </tr>
            ))}
          </tbody>
        </table>
      </Panel>
      <Panel title="Method and assumptions">
        <p className="text-sm">{d.method.statement}</p>
        <p className="mt-2 text-sm">Loop search: {d.method.loopSearch}</p>
        <ul className="mt-2 list-disc pl-5 text-sm">{d.method.assumptions.map((a) => <li key={a}>{a}</li>)}</ul>
        <p className="mt-2 text-xs text-ink-600">Sources: {d.method.sources.join('; ')}</p>
      </Panel>
      <Caution />
    </>
  );
}
