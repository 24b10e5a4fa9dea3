import { Link } from 'react-router';
import { useReconciliation } from '../../api/network';
import { ResidualPlot } from '../../components/plots/residual-plot';
import { Caution, EmptyState, Panel } from '../../components/ui';
import { fmt, when } from './format';
import { NetworkNav } from './network-nav';
import type { ReconciliationVerdict } from '../../../shared/network';
import { typeset } from '../../components/typeset';

export function ReconciliationPage() {
  const rec = useReconciliation();
  const r = rec.data;
  return (
    <>
      <h1>Reconciliation: clocks and levelling</h1>
      <NetworkNav />
      <Caution>
        This is a scientific comparison of clock-derived and levelled potential differences. It does not change any height. Decisions about a
        height datum rest with the national height authority. Uncertainties are expanded with k = 2.
      </Caution>
      {r?.message && <EmptyState title="Nothing to compare yet">{r.message}</EmptyState>}
      {r && r.rows.length > 0 && (
        <>
          <Panel title="Potential differences per clock link">
            <p className="mb-2 text-xs text-ink-500">
              Levelling side: adjustment run {r.levellingRunId ? <Link to={`/network/runs/${r.levellingRunId}`}>of {when(r.levellingRunAt)}</Link> : '—'} without clock observations.{' '}
              {typeset('Eₙ = (ΔC_clock − ΔC_levelling) / √(U_clock² + U_levelling²) (ISO 13528);')} |Eₙ| ≤ 1 means agreement. Eₙ is given only where both sites' heights are in one datum or levelling connects their datums; otherwise the levelled ΔC contains the unknown offset between the datums.
            </p>
            <div className="overflow-x-auto">
              <table className="min-w-full text-sm">
                <thead className="text-left align-bottom text-ink-600">
                  <tr>
                    <th className="py-1 pr-4">Link / campaign</th><th className="pr-4">From → to</th>
                    <th className="pr-4 text-right">Clock ΔC<span className="block text-xs font-normal">m²/s², ± U (k = 2)</span></th>
                    <th className="pr-4 text-right">Levelling ΔC<span className="block text-xs font-normal">m²/s², ± U (k = 2)</span></th>
                    <th className="pr-4 text-right">Clock − levelling<span className="block text-xs font-normal">m²/s²</span></th>
                    <th className="pr-4 text-right">Eₙ</th><th>Verdict</th>
                  </tr>
                </thead>
                <tbody>
                  {r.rows.map((row) => (
                    <tr key={row.campaignId} className="border-t border-paper-200 align-top" data-testid="reconciliation-row">
                      <td className="py-1 pr-4">{row.linkLabel}<span className="block text-xs text-ink-500">{row.campaignLabel}</span></td>
                      <td className="pr-4">{row.fromSite} → {row.toSite}
                        {row.fromDatum && row.toDatum && <span className="block text-xs text-ink-500">{row.fromDatum === row.toDatum ? row.fromDatum : `${row.fromDatum} → ${row.toDatum}`}</span>}
                      </td>
                      <td className="whitespace-nowrap pr-4 text-right tabular-nums">{fmt(row.clockDeltaC_m2s2, 3)} ± {fmt(row.clockExpandedU_m2s2, 3)}</td>
                      <td className="whitespace-nowrap pr-4 text-right tabular-nums">{row.levellingDeltaC_m2s2 === null ? '—' : `${fmt(row.levellingDeltaC_m2s2, 3)} ± ${fmt(row.levellingExpandedU_m2s2, 3)}`}
                        {row.levellingSigma_m2s2 != null && (
                          <span className="block text-xs font-normal text-ink-500" data-testid="levelling-sigma">
                            {row.levellingSigmaMethod === 'covariance' ? 'σ with covariance' : 'σ root-sum-square'} {fmt(row.levellingSigma_m2s2, 3)}
                            {row.levellingSigmaMethod === 'covariance' && row.levellingSigmaIgnoringCovariance_m2s2 != null && <> (neglecting it: {fmt(row.levellingSigmaIgnoringCovariance_m2s2, 3)})</>}
                            {row.levellingSigmaScaled ? ' · ×σ̂0' : ''}
                          </span>
                        )}
                      </td>
                      <td className="whitespace-nowrap pr-4 text-right tabular-nums">{fmt(row.difference_m2s2, 3)}{row.verdict === 'not-comparable' && row.tide && <span className="block text-xs text-ink-500">includes the datum offset</span>}
                        <span className="block max-w-xs whitespace-normal text-left text-xs text-ink-500" data-testid="tide-conversion">{row.tide ? row.tide.statement : 'tide system not stated: not converted, not compared'}</span>
                      </td>
                      <td className="whitespace-nowrap pr-4 text-right tabular-nums">{row.comparable ? fmt(row.en, 2) : <span className="text-ink-400" title="Eₙ is not meaningful here">n/a</span>}</td>
                      <td className="max-w-sm"><Verdict verdict={row.verdict} />
                        {row.note && <span className="mt-1 block text-xs text-ink-500">{row.note}</span>}
                        {row.verdict === 'not-comparable' && (
                          <span className="mt-1 block text-xs"><a href="#datum-offsets">Datum-offset estimate ↓</a></span>
                        )}
                      </td>
                    </tr>
                  ))}
                </tbody>
              </table>
            </div>
          </Panel>
          {r.sigmaPolicy && (
            <Panel title="How the uncertainties are formed">
              <ul className="list-disc pl-5 text-sm" data-testid="sigma-policy">
                <li>{r.sigmaPolicy.covariance}</li>
                <li>{r.sigmaPolicy.statement}</li>
                <li>Tide systems: the clock results state theirs (mean-tide), each datum its own; the two ΔC are converted to one system before the difference and Eₙ (permanent tide after Ekman 1989, 1 + k − h = 0.68 after Mäkinen &amp; Ihde 2009). A row whose tide system is not stated is not compared.</li>
                <li>Clock U (k = 2) is the campaign’s combined uncertainty as computed for its result. Verify against your national datum authority and your lab’s quality procedures before using a verdict.</li>
              </ul>
            </Panel>
          )}
          <Panel title="Eₙ per campaign">
            {r.rows.some((row) => row.comparable)
              ? <ResidualPlot title="Normalised error Eₙ per clock campaign" axisLabel="Eₙ (dashed: ±1)" critical={1}
                items={r.rows.filter((row) => row.comparable).map((row) => ({ id: row.campaignId, label: `${row.campaignLabel} (${row.linkLabel})`, value: row.en }))} />
              : <p className="text-sm text-ink-500">No campaign can be compared with the levelling yet.</p>}
            {r.rows.some((row) => row.verdict === 'not-comparable') && (
              <p className="mt-1 text-xs text-ink-500">Campaigns whose sites lie in two datums that no levelling connects are left out: their Eₙ would test the datum offset, not the clocks.</p>
            )}
          </Panel>
          {r.datumOffsets.length === 0 && r.rows.some((row) => row.verdict === 'not-comparable') && (
            <Panel title="Datum offsets estimated from clocks">
              <span id="datum-offsets" />
              <p className="text-sm text-ink-600">
                No finished adjustment run includes the clocks yet. A run with “include clocks” (it adds one offset parameter per datum against a reference datum) estimates
                the offset between datums that levelling does not connect: <Link to="/network/runs">start one on the adjustment runs page</Link>.
              </p>
            </Panel>
          )}
          {r.datumOffsets.length > 0 && (
            <Panel title="Datum offsets estimated from clocks">
              <span id="datum-offsets" />
              <p className="mb-1 text-xs text-ink-500">From the latest run with clock observations: one offset per datum against the reference datum, offset = C in that datum − C in the reference (positive: that datum's numbers are too large). Offsets of three or more datums close by construction.</p>
              <ul className="text-sm">{r.datumOffsets.map((d) => <li key={d.name}>{d.name}: {fmt(d.value_m2s2, 3)} ± {fmt(2 * d.sigma_m2s2, 3)} m²/s² (k = 2), about {fmt(d.valueMm, 0)} ± {fmt(2 * d.sigmaMm, 0)} mm</li>)}</ul>
            </Panel>
          )}
        </>
      )}
    </>
  );
}

const verdictText: Record<ReconciliationVerdict, string> = {
  'agreed': '✓ agreed',
  'not-agreed': '✕ not agreed',
  'not-comparable': '○ not comparable',
  'no-levelling': '— no levelled ΔC',
};

/** Shape and words carry the verdict; only the two real verdicts get the agree/disagree colours. */
function Verdict({ verdict }: { verdict: ReconciliationVerdict }) {
  const cls = verdict === 'agreed' ? 'bg-agree-100 text-agree-800' : verdict === 'not-agreed' ? 'bg-disagree-100 text-disagree-800' : 'bg-paper-100 text-ink-700';
  return <span data-testid="verdict" className={`inline-block rounded px-2 py-0.5 font-semibold ${cls}`}>{verdictText[verdict]}</span>;
}
