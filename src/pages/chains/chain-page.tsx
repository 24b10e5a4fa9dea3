import { Link, useNavigate, useParams } from 'react-router';
import { coverageText } from '../../../shared/number-text';
import { useMe } from '../../api/account';
import { useChain, useChainResult, useDeleteChain } from '../../api/chains';
import { useChainCertificates } from '../../api/certificates';
import { Button, Caution, EmptyState, Panel } from '../../components/ui';
import { describeError } from '../../lib/api-client';
import { Facts, sci } from '../registry/registry-ui';
import { ChainCertificatesPanel } from '../certificates/chain-certificates-panel';

const fixed = (v: number, d = 3) => (v < 0 ? `−${Math.abs(v).toFixed(d)}` : v.toFixed(d));

export function ChainPage() {
  const { id = '' } = useParams();
  const chain = useChain(id);
  const result = useChainResult(id);
  const me = useMe();
  const del = useDeleteChain();
  // A chain with a certificate is never deleted (the certificate names it): no Delete action then.
  const certified = (useChainCertificates(id).data?.total ?? 0) > 0;
  const navigate = useNavigate();
  if (chain.isPending) return <p className="text-ink-500">Loading…</p>;
  if (chain.isError) return <EmptyState title="This chain could not be loaded">{describeError(chain.error)}</EmptyState>;
  const c = chain.data;
  const canWrite = me.data?.role === 'coordinator' || (me.data?.role === 'operator' && me.data.institute?.code === c.transportableClock.instituteCode);
  const r = result.data;
  const campaignLink = (x: { id: string; name: string; periodStart: string; periodEnd: string } | null) =>
    x ? <><Link to={`/campaigns/${x.id}`}>{x.name}</Link> <span className="text-ink-500">({x.periodStart.slice(0, 10)} – {x.periodEnd.slice(0, 10)})</span></> : <span className="text-ink-500">none</span>;
  return (
    <>
      <header className="flex items-end justify-between">
        <div>
          <h1>{c.name}</h1>
          <p className="text-sm text-ink-500">Calibration chain of {c.transportableClock.name} against {c.referenceClock.name} · {c.state === 'accepted' ? 'accepted: every campaign is accepted, the chain enters the network adjustment' : 'pending: a campaign is not accepted yet'}</p>
        </div>
        <div className="flex gap-2">
          <a className="rounded-md border border-ink-200 px-3 py-1.5 text-sm" href={`/api/v1/chains/${c.id}/result.csv`}>CSV</a>
          <a className="rounded-md border border-ink-200 px-3 py-1.5 text-sm" href={`/api/v1/chains/${c.id}/result.json`}>JSON</a>
          {canWrite && !certified && <Button variant="danger" onClick={async () => { if (window.confirm('Delete this chain? Its campaigns stay.')) { await del.mutateAsync(c.id); navigate('/chains'); } }}>Delete</Button>}
        </div>
      </header>
      <Panel title="Parts">
        <Facts items={[
          ['Before (side by side)', campaignLink(c.beforeCampaign)],
          ['Remote', campaignLink(c.remoteCampaign)],
          ['After (side by side)', campaignLink(c.afterCampaign)],
          ['Transport reproducibility', c.transportReproducibility === null ? 'from the before/after difference' : `${sci(c.transportReproducibility)} (${c.transportReproducibilitySource ?? ''})`],
        ]} />
      </Panel>
      {result.isError && <EmptyState title="No chain result yet">{describeError(result.error)}</EmptyState>}
      {r && (
        <>
          <Panel title="Result">
            <div data-testid="chain-result" className="text-lg">
              ΔC = C({r.toSite.name}) − C({r.fromSite.name}) = <strong>{fixed(r.deltaC_m2s2.value)} m²/s²</strong>, U = {fixed(r.deltaC_m2s2.expandedUncertainty)} m²/s²
            </div>
            <p className="text-sm text-ink-600">{coverageText(r.deltaC_m2s2)} · u_c = {fixed(r.deltaC_m2s2.standardUncertainty)} m²/s² · {r.tideSystem}</p>
            <p className="text-sm text-ink-600">ΔH = {fixed(r.deltaH_m.value, 4)} m, U = {fixed(r.deltaH_m.expandedUncertainty, 4)} m (same k) · y_remote = {sci(r.yRemote, 6)}, ȳ_side-by-side = {sci(r.ySideBySide, 4)}</p>
            <p className="mt-2 text-sm">{r.cancellation}</p>
          </Panel>
          <Panel title="Before/after check">
            {r.beforeAfter ? (
              <div data-testid="before-after" className={`rounded-md px-3 py-2 text-sm ${r.beforeAfter.agreed ? 'bg-agree-100' : 'bg-disagree-100 text-disagree-800'}`}>
                <p>{r.beforeAfter.agreed ? '✓' : '✕'} {r.beforeAfter.statement}</p>
              </div>
            ) : <p className="text-sm">One calibration only: no before/after check; the transport reproducibility was entered.</p>}
            <table className="mt-2 text-sm [&_td]:py-0.5">
              <thead><tr><th className="pr-4 text-left">Calibration</th><th className="pr-4 text-right">offset o</th><th className="pr-4 text-right">u (unshared)</th><th className="pr-4 text-right">weight</th><th className="text-left">local tie</th></tr></thead>
              <tbody>{r.calibrations.map((k) => (
                <tr key={k.which}><td className="pr-4">{k.which}</td><td className="pr-4 text-right">{sci(k.offset, 4)}</td><td className="pr-4 text-right">{sci(k.unsharedUncertainty)}</td><td className="pr-4 text-right">{k.weight.toFixed(3)}</td>
                  <td>{k.localTie ? `${fixed(k.localTie.deltaC_m2s2)} ± ${fixed(k.localTie.standardUncertainty_m2s2)} m²/s² (${k.localTie.source})` : '—'}</td></tr>
              ))}</tbody>
            </table>
            <p className="mt-1 text-xs text-ink-500">Transport term: u = {sci(r.transport.standardUncertainty)} ({r.transport.source}{r.transport.degreesOfFreedom !== null ? `, ν = ${r.transport.degreesOfFreedom}` : ''}).</p>
          </Panel>
          <Panel title="Budget of ΔC (GUM, shared inputs grouped)">
            <table className="w-full text-sm [&_td]:px-2 [&_td]:py-0.5 [&_th]:px-2" data-testid="chain-budget">
              <thead><tr className="text-left"><th>Input</th><th>Type</th><th className="text-right">u(xᵢ)</th><th className="text-right">cᵢ (m²/s² per unit)</th><th className="text-right">|cᵢ|·u(xᵢ) (m²/s²)</th><th className="text-right">share</th><th className="text-right">ν</th><th>enters</th></tr></thead>
              <tbody>{r.lines.map((l) => (
                <tr key={l.key} className={l.cancels ? 'text-ink-400' : ''}>
                  <td>{l.label}{l.cancels ? ' — cancels exactly' : ''}</td><td>{l.type}</td>
                  <td className="text-right">{sci(l.standardUncertainty)} {l.unit === '1' ? '' : l.unit.replace('m2/s2', 'm²/s²')}</td>
                  <td className="text-right">{sci(l.sensitivity_m2s2)}</td><td className="text-right">{l.contribution_m2s2.toFixed(4)}</td>
                  <td className="text-right">{(100 * l.varianceShare).toFixed(1)} %</td><td className="text-right">{l.degreesOfFreedom === null ? '∞' : l.degreesOfFreedom.toFixed(1)}</td>
                  <td className="text-xs">{l.enters.map((e) => e.comparison).join('; ')}</td>
                </tr>
              ))}</tbody>
            </table>
            <p className="mt-2 text-xs text-ink-500">{r.method.statement} Sources: {r.method.sources.join('; ')}.</p>
          </Panel>
          <Panel title="Assumptions and cautions">
            <ul className="list-disc pl-5 text-sm">{[...r.assumptions, ...r.cautions].map((a) => <li key={a}>{a}</li>)}</ul>
          </Panel>
        </>
      )}
      <ChainCertificatesPanel chainId={c.id} chainAccepted={c.state === 'accepted'} needsJustification={!!r?.beforeAfter && !r.beforeAfter.agreed} />
      <Caution />
    </>
  );
}
