import { useState } from 'react';
import { Link, useNavigate, useParams } from 'react-router';
import { useRun, useRunProgress } from '../../api/network';
import { ProgressBar } from '../../components/progress-bar';
import { ResidualPlot } from '../../components/plots/residual-plot';
import { Caution, Panel } from '../../components/ui';
import { fmt, when } from './format';
import { NetworkNav } from './network-nav';
import { plural } from '../../lib/format';

export function RunPage() {
  const { id = '' } = useParams();
  const run = useRun(id);
  const open = run.data?.state === 'queued' || run.data?.state === 'running';
  const live = useRunProgress(id, open).data;
  const navigate = useNavigate();
  const [showAll, setShowAll] = useState(false);
  const r = run.data;
  if (!r) return <p>Loading…</p>;
  const res = r.result;
  const obs = res ? [...res.observations].sort((a, b) => Math.abs(b.standardizedResidual ?? 0) - Math.abs(a.standardizedResidual ?? 0)) : [];
  return (
    <>
      <h1>Adjustment run of {when(r.createdAt)}</h1>
      <NetworkNav />
      <Panel title="Progress">
        <div className="max-w-md">
          <ProgressBar label="Adjustment run" progress={open && live ? live : { state: r.state, stage: r.state === 'done' ? 'finished' : (r.stage ?? r.state), fraction: r.progress, error: null }} />
        </div>
        <p className="mt-1 text-sm" data-testid="run-state">{r.state === 'done' ? '✓ finished' : r.state === 'failed' ? '✕ failed' : `${live?.state ?? r.state}: ${live?.stage ?? r.stage ?? ''} (${Math.round((live?.fraction ?? r.progress) * 100)} %)`}</p>
        {r.error && <p role="alert" className="mt-2 text-sm text-disagree-800">{r.error.message}</p>}
        <p className="mt-2 text-xs text-ink-500">
          Inputs: {plural(r.inputSummary.benchmarks, 'benchmark')}, {plural(r.inputSummary.sections, 'section')}, {plural(r.inputSummary.ties, 'local tie')}, {plural(r.inputSummary.clocks, 'clock comparison')} ·
          σ = {r.options.sigmaMmPerSqrtKm} mm/√km · datum: {r.options.constraint === 'fixed' ? 'fixed benchmarks' : 'minimum constraint'} · input SHA-256 {r.inputSummary.inputSha256.slice(0, 12)}…
        </p>
      </Panel>
      {res && (
        <>
          {res.globalTest && !res.globalTest.passed && (
            <div role="alert" data-testid="global-test-failed" className="my-4 rounded-md border-2 border-disagree-600 bg-disagree-100 px-4 py-3 text-sm text-disagree-800">
              <p className="text-base font-semibold">✕ This adjustment failed its global test: the heights below are provisional.</p>
              <p className="mt-1">
                σ̂0 = {fmt(res.sigma0, 3)} (expected about 1): the test statistic {fmt(res.globalTest.statistic, 2)} lies outside [{fmt(res.globalTest.lower, 2)}, {fmt(res.globalTest.critical, 2)}] (χ², α = {res.globalTest.alpha}).
                The observations do not fit their stated uncertainties.{' '}
                {res.snooping.suspects.length > 0
                  ? <>Data snooping already removed {res.snooping.suspects.length} observation(s) (listed under Statistics) and the rest still does not fit: check the a-priori σ per km and the fixed benchmarks.</>
                  : 'No single observation stands out: check the a-priori σ per km and the fixed benchmarks, then run again.'}
              </p>
            </div>
          )}
          <Panel title="Statistics">
            <dl className="grid grid-cols-2 gap-x-6 gap-y-1 text-sm md:grid-cols-4">
              <dt className="text-ink-500">Unknowns</dt><dd>{res.unknowns}</dd>
              <dt className="text-ink-500">Degrees of freedom</dt><dd>{res.degreesOfFreedom} (Σr = {fmt(res.redundancySum, 3)})</dd>
              <dt className="text-ink-500">σ̂0 (a-posteriori, a-priori 1)</dt><dd>{fmt(res.sigma0, 3)}</dd>
              <dt className="text-ink-500">vᵀPv</dt><dd>{fmt(res.vtpv, 2)}</dd>
              <dt className="text-ink-500">Global χ² test (α = {res.globalTest?.alpha ?? 0.05})</dt>
              <dd data-testid="global-test">{res.globalTest ? `${res.globalTest.passed ? '✓ passed' : '✕ rejected'}: ${fmt(res.globalTest.statistic, 2)} in [${fmt(res.globalTest.lower, 2)}, ${fmt(res.globalTest.critical, 2)}]` : 'no redundancy'}</dd>
              <dt className="text-ink-500">Data snooping</dt><dd>critical |w| = {fmt(res.snooping.criticalValue, 2)} (α0 = {res.snooping.alpha0}, Baarda 1968, iterative)</dd>
              {res.snooping.initial && (<>
                <dt className="text-ink-500">Before any removal</dt>
                <dd>σ̂0 = {fmt(res.snooping.initial.sigma0, 3)}, dof {res.snooping.initial.degreesOfFreedom}, global test {res.snooping.initial.globalTestPassed === null ? '—' : res.snooping.initial.globalTestPassed ? 'passed' : 'rejected'}</dd>
              </>)}
              <dt className="text-ink-500">σ used</dt>
              <dd data-testid="sigma-policy">{res.sigmaScale ? (res.sigmaScale.applied ? `scaled by σ̂0 = ${fmt(res.sigmaScale.factor, 3)} (global test rejected)` : 'a-priori scale (σ0 = 1), not scaled by σ̂0') : 'a-priori scale (σ0 = 1)'}</dd>
            </dl>
            {res.sigmaScale && <p className="mt-1 text-xs text-ink-500">Rule: {res.sigmaScale.rule}</p>}
            {res.snooping.suspects.length > 0 ? (
              <div className="mt-3 rounded-md border border-disagree-600 bg-disagree-100 px-3 py-2 text-sm" data-testid="suspects">
                <p className="font-semibold text-disagree-800">✕ Removed by data snooping, in order (largest |w| above the critical value, then adjusted again):</p>
                <ol className="list-decimal pl-5" data-testid="removal-order">{res.snooping.suspects.map((s) => <li key={s.id}>{s.label}: w = {fmt(s.standardizedResidual, 2)} at removal</li>)}</ol>
                <p className="mt-1 text-xs">The results on this page are the final adjustment without them{res.snooping.stoppedEarly ? '; the iteration stopped early (limit or no redundancy left)' : ''}. Check each removed observation in the field records before relying on its removal.</p>
              </div>
            ) : <p className="mt-2 text-sm" data-testid="removal-order">No observation exceeded the critical value: nothing removed.</p>}
            {res.datumOffsets.length > 0 && (
              <p className="mt-2 text-sm" data-testid="datum-offsets">Datum offsets, one per datum against the reference datum {res.referenceDatum ?? ''} (C in that datum − C in the reference; ± standard deviation, k = 1): {res.datumOffsets.map((d) => `${d.name}: ${fmt(d.value_m2s2, 3)} ± ${fmt(d.sigma_m2s2, 3)} m²/s² (${fmt(d.valueMm, 0)} ± ${fmt(d.sigmaMm, 0)} mm)`).join('; ')}</p>
            )}
          </Panel>
          {res.entered && <EnteredPanel entered={res.entered} />}
          {(res.sharedParameters?.length ?? 0) > 0 && (
            <Panel title="Shared systematic parameters">
              <p className="mb-2 text-xs text-ink-500">
                Terms that several clock campaigns share (a clock’s budget version, a fibre link, a reference ratio) are parameters with prior 0 ± their standard uncertainty;
                each campaign keeps only its own part. Repeated campaigns therefore do not average these terms away. Estimates in m²/s², k = 1.
              </p>
              <table className="min-w-full text-sm" data-testid="shared-parameters">
                <thead className="text-left text-ink-600"><tr><th>Parameter</th><th>Campaigns</th><th>Prior σ</th><th>Estimate</th><th>σ after adjustment</th></tr></thead>
                <tbody>{res.sharedParameters!.map((p) => (
                  <tr key={p.name} className="border-t border-paper-200"><td>{p.label}</td><td>{p.observations}</td><td>{fmt(p.priorSigma_m2s2, 4)}</td><td>{fmt(p.value_m2s2, 4)}</td><td>{fmt(p.sigma_m2s2, 4)}</td></tr>
                ))}</tbody>
              </table>
            </Panel>
          )}
          {((res.tideConversions?.length ?? 0) > 0 || (res.excluded?.length ?? 0) > 0) && (
            <Panel title="Tide systems">
              <ul className="text-sm" data-testid="tide-conversions">
                {res.tideConversions!.map((c) => <li key={c.label}>{c.label}: {c.from} → {c.to}, {c.shift_m2s2 >= 0 ? '+' : '−'}{fmt(Math.abs(c.shift_m2s2), 4)} m²/s² (Ekman 1989; Mäkinen &amp; Ihde 2009)</li>)}
              </ul>
              {res.excluded?.map((x) => <p key={x.label} className="text-sm text-disagree-800">Left out: {x.label} — {x.reason}</p>)}
            </Panel>
          )}
          {(res.differences?.length ?? 0) > 0 && (
            <Panel title="Adjusted differences between linked sites">
              <table className="min-w-full text-sm" data-testid="run-differences">
                <thead className="text-left text-ink-600"><tr><th>From → to</th><th>ΔC (m²/s²)</th><th>σ with covariance (k = 1)</th><th>√(σ_A² + σ_B²), covariance neglected</th></tr></thead>
                <tbody>{res.differences!.map((d) => (
                  <tr key={`${d.from}-${d.to}`} className="border-t border-paper-200">
                    <td>{res.points.find((p) => p.code === d.from)?.label ?? d.from} → {res.points.find((p) => p.code === d.to)?.label ?? d.to}</td>
                    <td>{fmt(d.deltaC_m2s2, 4)}</td><td>{fmt(d.sigma_m2s2, 4)}</td><td>{fmt(d.sigmaIgnoringCovariance_m2s2, 4)}</td>
                  </tr>
                ))}</tbody>
              </table>
              <p className="mt-1 text-xs text-ink-500">σ² = q_AA + q_BB − 2q_AB from the adjustment’s cofactor matrix.</p>
            </Panel>
          )}
          <Panel title="Standardised residuals">
            <ResidualPlot title="Standardised residuals of the observations" axisLabel="standardised residual w (dashed: critical value)" critical={res.snooping.criticalValue}
              items={obs.slice(0, showAll ? obs.length : 25).map((o) => ({ id: o.id, label: o.label, value: o.standardizedResidual, onClick: o.kind === 'levelling' ? () => navigate('/network/sections') : undefined }))} />
            {obs.length > 25 && <button className="text-sm underline" onClick={() => setShowAll(!showAll)}>{showAll ? 'Show the 25 largest' : `Show all ${obs.length}`}</button>}
          </Panel>
          <Panel title={res.globalTest && !res.globalTest.passed ? 'Adjusted points (provisional: global test failed)' : 'Adjusted points'}>
            <div className="max-h-96 overflow-auto">
              <table className="min-w-full text-sm">
                <thead className="text-left text-ink-600"><tr><th>Point</th><th>Datum</th><th>C (m²/s²)</th><th>σ_C (m²/s², k = 1)</th><th>Normal height H (m)</th><th>σ_H (mm, k = 1)</th><th>Role</th></tr></thead>
                <tbody>
                  {res.points.map((p) => (
                    <tr key={p.code} className="border-t border-paper-200">
                      <td>{p.label}</td><td>{p.datumName ?? '—'}</td><td>{fmt(p.c_m2s2, 4)}</td><td>{fmt(p.sigmaC_m2s2, 4)}</td><td>{fmt(p.normalHeightM, 4)}</td><td>{fmt(p.sigmaHeightM * 1000, 1)}</td>
                      <td>{p.datum === 'held' ? '■ held' : p.datum}</td>
                    </tr>
                  ))}
                </tbody>
              </table>
            </div>
            <p className="mt-2 text-xs text-ink-500">σ are standard deviations (k = 1) with a-priori σ0 = 1, not scaled by σ̂0; H from C with the GRS80 mean normal gravity.</p>
          </Panel>
          <Panel title="Observations">
            <div className="max-h-96 overflow-auto">
              <table className="min-w-full text-sm">
                <thead className="text-left text-ink-600"><tr><th>Observation</th><th>Kind</th><th>ΔC (m²/s²)</th><th>σ (m²/s², k = 1)</th><th>Residual (m²/s²)</th><th>Redundancy r</th><th>w</th></tr></thead>
                <tbody>
                  {obs.map((o) => (
                    <tr key={o.id} className={`border-t border-paper-200 ${o.suspected ? 'bg-disagree-100' : ''}`}>
                      <td>{o.suspected ? `✕ removed (step ${o.removedAtStep ?? '?'}) ` : ''}{o.label}</td><td>{o.kind}</td><td>{fmt(o.deltaC_m2s2, 4)}</td><td>{fmt(o.sigma_m2s2, 4)}</td>
                      <td>{fmt(o.residual_m2s2, 4)}</td><td>{fmt(o.redundancy, 3)}</td><td className={o.suspected ? 'font-semibold text-disagree-800' : ''}>{fmt(o.standardizedResidual, 2)}</td>
                    </tr>
                  ))}
                </tbody>
              </table>
            </div>
          </Panel>
          <Caution />
        </>
      )}
    </>
  );
}

/** What entered the run: clocks, campaigns (directly or through a chain), calibration chains and ratio closures. */
function EnteredPanel({ entered }: { entered: NonNullable<NonNullable<ReturnType<typeof useRun>['data']>['result']>['entered'] & object }) {
  const chainName = new Map(entered.chains.map((c) => [c.id, c.name]));
  return (
    <Panel title="What entered this run">
      <div className="grid gap-4 text-sm md:grid-cols-2" data-testid="run-entered">
        <div>
          <h3 className="font-semibold">Clocks ({entered.clocks.length})</h3>
          <ul className="list-disc pl-5">{entered.clocks.map((c) => <li key={c.id}>{c.name} · {plural(c.campaigns, 'campaign')}</li>)}</ul>
        </div>
        <div>
          <h3 className="font-semibold">Calibration chains ({entered.chains.length})</h3>
          <p className="text-xs text-ink-500">Each chain is one observation; the campaigns it uses do not enter again.</p>
          <ul className="list-disc pl-5">{entered.chains.map((c) => <li key={c.id}><Link to={`/chains/${c.id}`}>{c.name}</Link> · {plural(c.campaignIds.length, 'campaign')}</li>)}</ul>
        </div>
        <div>
          <h3 className="font-semibold">Campaigns ({entered.campaigns.length})</h3>
          <ul className="list-disc pl-5">{entered.campaigns.map((c) => <li key={c.id}><Link to={`/campaigns/${c.id}`}>{c.name}</Link>{c.via === 'chain' ? ` · through the chain ${chainName.get(c.chainId ?? '') ?? ''}` : ' · as its own observation'}</li>)}</ul>
        </div>
        <div>
          <h3 className="font-semibold">Ratio closures ({entered.closures.length})</h3>
          <p className="text-xs text-ink-500">Loops whose every campaign entered: checks of the clock ratios, not observations of the adjustment.</p>
          <ul className="list-disc pl-5">{entered.closures.map((c) => (
            <li key={c.id}><Link to={`/network/closures/${c.id}`}>{c.name}</Link>{c.en !== undefined ? ` · Eₙ = ${c.en.toFixed(2)}${c.agreed ? ' (closes)' : ' (does not close)'}` : ''}</li>
          ))}</ul>
        </div>
      </div>
    </Panel>
  );
}
