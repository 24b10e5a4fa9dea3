import { Link } from 'react-router';
import { useReconciliation } from '../../api/network';
import { ResidualPlot } from '../../components/plots/residual-plot';
import { Caution, EmptyState, Panel } from '../../components/ui';
import { fmt, when } from './format';
import { NetworkNav } from './network-nav';

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
              Levelling side: adjustment run {r.levellingRunId ? <Link to={`/network/runs/${r.levellingRunId}`}>of {when(r.levellingRunAt)}</Link> : '—'} without clock observations.
              E_n = (ΔC_clock − ΔC_levelling) / √(U_clock² + U_levelling²) (ISO 13528); |E_n| ≤ 1 means agreement.
            </p>
            <div className="overflow-x-auto">
              <table className="min-w-full text-sm">
                <thead className="text-left text-ink-600">
                  <tr><th>Link / campaign</th><th>From → to</th><th>Clock ΔC ± U (m²/s²)</th><th>Levelling ΔC ± U (m²/s²)</th><th>Difference (m²/s²)</th><th>E_n</th><th>Verdict</th></tr>
                </thead>
                <tbody>
                  {r.rows.map((row) => (
                    <tr key={row.campaignId} className="border-t border-paper-200 align-top">
                      <td>{row.linkLabel}<span className="block text-xs text-ink-500">{row.campaignLabel}</span></td>
                      <td>{row.fromSite} → {row.toSite}</td>
                      <td>{fmt(row.clockDeltaC_m2s2, 3)} ± {fmt(row.clockExpandedU_m2s2, 3)}</td>
                      <td>{row.levellingDeltaC_m2s2 === null ? '—' : `${fmt(row.levellingDeltaC_m2s2, 3)} ± ${fmt(row.levellingExpandedU_m2s2, 3)}`}</td>
                      <td>{fmt(row.difference_m2s2, 3)}</td>
                      <td>{fmt(row.en, 2)}</td>
                      <td>{row.agreed === null ? '—' : row.agreed
                        ? <span className="rounded bg-agree-100 px-2 py-0.5 font-semibold text-agree-800">✓ agreed</span>
                        : <span className="rounded bg-disagree-100 px-2 py-0.5 font-semibold text-disagree-800">✕ not agreed</span>}
                        {row.note && <span className="mt-1 block text-xs text-ink-500">{row.note}</span>}
                      </td>
                    </tr>
                  ))}
                </tbody>
              </table>
            </div>
          </Panel>
          <Panel title="E_n per link">
            <ResidualPlot title="Normalised error E_n per clock link" axisLabel="E_n (dashed: ±1)" critical={1}
              items={r.rows.map((row) => ({ id: row.campaignId, label: row.linkLabel, value: row.en }))} />
          </Panel>
          {r.datumOffsets.length > 0 && (
            <Panel title="Datum offsets estimated from clocks">
              <p className="mb-1 text-xs text-ink-500">From the latest run with clock observations: offset = clock ΔC − levelled ΔC across the two datums (negative: the second datum's numbers are too large).</p>
              <ul className="text-sm">{r.datumOffsets.map((d) => <li key={d.name}>{d.name}: {fmt(d.value_m2s2, 3)} ± {fmt(2 * d.sigma_m2s2, 3)} m²/s² (k = 2), about {fmt(d.valueMm, 0)} ± {fmt(2 * d.sigmaMm, 0)} mm</li>)}</ul>
            </Panel>
          )}
        </>
      )}
    </>
  );
}
