import { Link, useParams } from 'react-router';
import { coverageText } from '../../../shared/number-text';
import type { ComparisonResultDto, ResultBody } from '../../../shared/results';
import { useMe } from '../../api/account';
import { resultCsvUrl, useCampaignResult, useRecomputeResult, useResultProgress, type CampaignResultState } from '../../api/results';
import { ProgressBar } from '../../components/progress-bar';
import { AllanPlot } from '../../components/plots/allan-plot';
import { typeset } from '../../components/typeset';
import { Button, Caution, EmptyState, Panel } from '../../components/ui';
import { describeError } from '../../lib/api-client';
import { fixed, sci, sig } from '../../lib/format';
import { ResultSeriesPlots } from './y-series-plot';

// The comparison result of one campaign: what was measured, how uncertain, and whether it agrees with geodesy.

const e = (v: number | null | undefined, digits = 3) => sci(v, digits);
const f = (v: number, decimals: number) => fixed(v, decimals);
/** Decimals so that the expanded uncertainty shows two significant digits (GUM 7.2.6 practice). */
const decimalsFor = (u: number) => Math.max(0, Math.min(9, 1 - Math.floor(Math.log10(u || 1))));

type Expanded = ResultBody['deltaC_m2s2'];

function Quantity({ label, q, unit, testId }: { label: string; q: Expanded; unit: string; testId: string }) {
  const d = decimalsFor(q.expandedUncertainty);
  return (
    <div className="rounded-lg border border-paper-200 bg-white p-4">
      <p className="text-xs font-medium text-ink-500">{typeset(label)}</p>
      <p className="mt-1 font-mono text-lg text-ink-900" data-testid={testId}>{f(q.value, d)} ± {f(q.expandedUncertainty, d)} {unit}</p>
      <p className="text-xs text-ink-500" data-testid={`${testId}-coverage`}>expanded uncertainty, {coverageText(q)}</p>
    </div>
  );
}

/** Side-by-side campaigns: the offset between the clocks once the local tie's redshift is removed. */
function SideBySidePanel({ r }: { r: ResultBody }) {
  const s = r.sideBySide;
  if (!s) return null;
  return (
    <Panel title="Side-by-side: offset between the clocks">
      <p className="font-mono text-lg text-ink-900" data-testid="side-by-side-offset">{e(s.offset, 3)} ± {e(s.expandedUncertainty, 2)}</p>
      <p className="text-xs text-ink-500">y(B) − y(A) of the clocks, expanded uncertainty U = k·u with k = {s.coverageFactor.toFixed(2)}, p = {(100 * s.coverageProbability).toFixed(2)} %; standard uncertainty u = {e(s.standardUncertainty, 2)}</p>
      <table className="mt-3 min-w-full text-sm">
        <tbody>
          <tr className="border-t border-paper-200"><td className="py-1.5 text-ink-600">Sites (A, B)</td><td>{s.sites.a} · {s.sites.b}</td></tr>
          <tr className="border-t border-paper-200"><td className="py-1.5 text-ink-600">Measured y (tides removed)</td><td className="font-mono">{e(s.yMeasured, 4)} ± {e(s.uYMeasured, 2)} (k = 1)</td></tr>
          <tr className="border-t border-paper-200"><td className="py-1.5 text-ink-600">Local tie ΔC_local</td><td className="font-mono">{s.localDeltaC_m2s2.toFixed(4)} ± {s.localDeltaCUncertainty_m2s2.toFixed(4)} m²/s² (k = 1) → ΔC/c² = {e(s.localTieY, 4)}</td></tr>
          <tr className="border-t border-paper-200"><td className="py-1.5 text-ink-600">Source of the tie</td><td>{s.localTieSource}</td></tr>
          <tr className="border-t border-paper-200"><td className="py-1.5 text-ink-600">Method</td><td>{s.formula}. {s.sources.join('; ')}.</td></tr>
        </tbody>
      </table>
      <Caution>Not a potential difference: this campaign does not enter the network adjustment. Verify the local tie against your national datum authority and your lab’s quality procedures.</Caution>
    </Panel>
  );
}

function Agreement({ r }: { r: ResultBody }) {
  const g = r.geodesy;
  if (!g) return <Panel title="Agreement with the sites’ registered normal heights (geodesy)"><p className="text-sm">No geodetic uncertainty is registered for the sites, so Eₙ cannot be formed.</p></Panel>;
  const ok = g.agreed;
  return (
    <Panel title="Agreement with the sites’ registered normal heights (geodesy)">
      <div className={`flex items-start gap-3 rounded-md border-l-4 px-4 py-3 ${ok ? 'border-agree-600 bg-agree-100 text-agree-800' : 'border-disagree-600 bg-disagree-100 text-disagree-800'}`} data-testid="agreement" role="status">
        <span aria-hidden className="text-2xl leading-none">{ok ? '✓' : '✗'}</span>
        <div>
          <p className="font-semibold">{ok ? 'Agreed' : 'Not agreed'} — Eₙ = {f(g.en, 2)}</p>
          <p className="text-sm">{g.statement}</p>
        </div>
      </div>
      <table className="mt-3 min-w-full text-sm">
        <tbody>
          <tr className="border-t border-paper-200"><td className="py-1.5 text-ink-600">ΔH from the clocks (H_B − H_A)</td><td className="text-right font-mono">{f(r.deltaH_m.value, 4)} ± {f(r.deltaH_m.expandedUncertainty, 4)} m ({coverageText(r.deltaH_m)})</td></tr>
          <tr className="border-t border-paper-200"><td className="py-1.5 text-ink-600">ΔH from geodesy ({g.source})</td><td className="text-right font-mono">{f(g.deltaH_m.value, 4)} ± {f(g.deltaH_m.expandedUncertainty, 4)} m ({coverageText(g.deltaH_m)})</td></tr>
          <tr className="border-t border-paper-200"><td className="py-1.5 text-ink-600">Difference (clocks − geodesy)</td><td className="text-right font-mono" data-testid="agreement-difference">{f(g.differenceM, 4)} ± {f(Math.hypot(r.deltaH_m.expandedUncertainty, g.deltaH_m.expandedUncertainty), 4)} m (√(U_clocks² + U_geodesy²))</td></tr>
          <tr className="border-t border-paper-200"><td className="py-1.5 text-ink-600">Eₙ = difference / √(U_clocks² + U_geodesy²)</td><td className="text-right font-mono">{f(g.en, 3)} ({Math.abs(g.en) <= 1 ? '|Eₙ| ≤ 1' : '|Eₙ| > 1'})</td></tr>
        </tbody>
      </table>
    </Panel>
  );
}

function BudgetPanel({ r }: { r: ResultBody }) {
  const b = r.budget;
  return (
    <Panel title="Uncertainty budget (GUM)">
      <p className="mb-2 text-sm text-ink-600">Output quantity: {b.outputQuantity}. Contributions |c_i|·u(x_i); {b.correlation}.</p>
      <div className="overflow-x-auto">
        <table className="min-w-full text-sm" data-testid="budget-table">
          <thead className="text-left text-ink-500">
            <tr><th className="py-1">Component</th><th className="px-3">Type</th><th className="px-3 text-right">u(x_i)</th><th className="px-3 text-right">c_i</th><th className="px-3 text-right">|c_i|·u(x_i)</th><th className="pl-3 text-right">Share of u_c²</th></tr>
          </thead>
          <tbody>
            {b.lines.map((l) => (
              <tr key={l.component} className="border-t border-paper-200 align-top">
                <td className="py-1.5 pr-3">{l.component}<span className="block text-xs text-ink-400">{l.note}</span></td>
                <td className="px-3">{l.type}</td>
                <td className="whitespace-nowrap px-3 text-right font-mono">{e(l.standardUncertainty)}</td>
                <td className="whitespace-nowrap px-3 text-right font-mono">{l.sensitivity.toFixed(3)}</td>
                <td className="whitespace-nowrap px-3 text-right font-mono">{e(l.contribution)}</td>
                <td className="whitespace-nowrap pl-3 text-right font-mono">{(100 * l.varianceShare).toFixed(1)} %</td>
              </tr>
            ))}
            <tr className="border-t-2 border-ink-200 font-medium"><td className="py-1.5">Combined standard uncertainty u_c</td><td /><td /><td /><td className="whitespace-nowrap px-3 text-right font-mono">{e(b.combinedStandardUncertainty)}</td><td className="text-right">100 %</td></tr>
            <tr className="font-medium"><td className="py-1.5" data-testid="budget-coverage">Expanded uncertainty U ({coverageText(b)})</td><td /><td /><td /><td className="whitespace-nowrap px-3 text-right font-mono">{e(b.expandedUncertainty)}</td><td /></tr>
          </tbody>
        </table>
      </div>
      <p className="mt-2 text-xs text-ink-500">{b.coverageRule} {b.systematicCorrections}</p>
    </Panel>
  );
}

const range = (v: number | null, lo: number | null, hi: number | null) => (v === null ? '—' : `${e(v)} (${e(lo, 2)} … ${e(hi, 2)})`);

function StabilityTable({ r }: { r: ResultBody }) {
  return (
    <details className="mt-3">
      <summary className="cursor-pointer text-sm font-medium text-ink-700">Table: ADEV, MDEV, TDEV, HDEV and TOTDEV with 68.3 % intervals and the noise type at each τ</summary>
      <div className="mt-2 overflow-x-auto">
        <table className="min-w-full text-xs" data-testid="stability-table">
          <thead className="text-left text-ink-500">
            <tr><th className="py-1 pr-3">τ (s)</th><th className="px-2">OADEV</th><th className="px-2">EDF</th><th className="px-2">MDEV</th><th className="px-2">TDEV (s)</th><th className="px-2">HDEV</th><th className="px-2">TOTDEV</th><th className="px-2">Noise</th></tr>
          </thead>
          <tbody>
            {r.stability.points.map((p) => (
              <tr key={p.tauSeconds} className="border-t border-paper-200 font-mono">
                <td className="py-1 pr-3">{sig(p.tauSeconds, 6)}</td>
                <td className="whitespace-nowrap px-2">{range(p.adev, p.adevLow, p.adevHigh)}</td>
                <td className="px-2">{p.edf === null ? '—' : sig(p.edf, 3)}</td>
                <td className="whitespace-nowrap px-2">{range(p.mdev, p.mdevLow, p.mdevHigh)}</td>
                <td className="whitespace-nowrap px-2">{range(p.tdev, p.tdevLow, p.tdevHigh)}</td>
                <td className="whitespace-nowrap px-2">{range(p.hdev, p.hdevLow, p.hdevHigh)}</td>
                <td className="whitespace-nowrap px-2">{p.totdev === null ? '—' : e(p.totdev)}</td>
                <td className="px-2 font-sans">{p.noiseType} <span className="text-ink-400">({p.noiseMethod === 'acf' ? 'lag-1 ACF' : p.noiseMethod === 'b1' ? 'B1/R(n)' : 'carried over'})</span></td>
              </tr>
            ))}
          </tbody>
        </table>
      </div>
    </details>
  );
}

function download(name: string, data: ComparisonResultDto) {
  const url = URL.createObjectURL(new Blob([JSON.stringify(data, null, 2)], { type: 'application/json' }));
  const a = document.createElement('a');
  a.href = url;
  a.download = name;
  a.click();
  URL.revokeObjectURL(url);
}

/** The worker's progress on the result while it is computed. */
function PendingProgress({ campaignId }: { campaignId: string }) {
  const progress = useResultProgress(campaignId, true);
  const p = progress.data ?? { state: 'queued' as const, stage: 'waiting for a worker', fraction: 0, error: null };
  return <div className="mt-3 max-w-md"><ProgressBar label="Computing the result" progress={p} /></div>;
}

/** No current result: being computed (a job; the page asks again every few seconds), failed, or not asked for yet. */
function ResultNotReady(props: { campaignId: string; state: Extract<CampaignResultState, { kind: 'not-ready' }>; canRecompute: boolean; recompute: () => void; recomputing: boolean; error: Error | null }) {
  const { state } = props;
  const pending = state.code === 'result-pending';
  const title = pending ? 'Computing the result' : state.code === 'result-failed' ? 'The result could not be computed' : 'No result computed yet';
  return (
    <>
      <p className="text-sm text-ink-500"><Link to={`/campaigns/${props.campaignId}`}>Back to the campaign</Link></p>
      <section className="rounded-md border border-ink-200 bg-white p-5" data-testid="result-state" data-state={state.code} aria-live="polite" aria-busy={pending}>
        <h1 className="flex items-center gap-3 text-xl">
          {pending && <span aria-hidden className="inline-block h-4 w-4 animate-spin rounded-full border-2 border-ink-300 border-t-ink-700" />}
          {title}
        </h1>
        <p className="mt-2 text-sm text-ink-700">{state.problem.detail}</p>
        {pending && <PendingProgress campaignId={props.campaignId} />}
        {pending && <p className="mt-1 text-xs text-ink-500">This page looks again every few seconds; a campaign with millions of samples takes a little while.</p>}
        {!pending && props.canRecompute && (
          <Button className="mt-3" variant="quiet" onClick={props.recompute} disabled={props.recomputing}>{props.recomputing ? 'Asking…' : 'Compute the result'}</Button>
        )}
        {props.error && <p className="mt-2 text-sm text-disagree-600" role="alert">{describeError(props.error)}</p>}
      </section>
    </>
  );
}

export function ResultsPage() {
  const { id = '' } = useParams();
  const result = useCampaignResult(id);
  const recompute = useRecomputeResult(id);
  const me = useMe();
  const canRecompute = me.data?.role === 'operator' || me.data?.role === 'coordinator';
  if (result.isPending) return <p className="text-ink-500">Loading the result…</p>;
  if (result.isError) {
    return (
      <>
        <p className="text-sm text-ink-500"><Link to={`/campaigns/${id}`}>Back to the campaign</Link></p>
        <EmptyState title="No result for this campaign">{describeError(result.error)}</EmptyState>
      </>
    );
  }
  if (result.data.kind === 'not-ready') {
    return <ResultNotReady campaignId={id} state={result.data} canRecompute={canRecompute} recompute={() => recompute.mutate()} recomputing={recompute.isPending} error={recompute.error} />;
  }
  const dto = result.data.dto;
  const r = dto.result;
  return (
    <>
      <header className="flex flex-wrap items-end justify-between gap-3">
        <div>
          <p className="text-sm text-ink-500"><Link to={`/campaigns/${id}`}>{r.campaign.name}</Link> / Results</p>
          <h1>Comparison result</h1>
          <p className="mt-1 text-sm text-ink-600">{r.clockA.name} ({r.clockA.institute}) → {r.clockB.name} ({r.clockB.institute}) over {r.link.name}</p>
          <p className="text-xs text-ink-500">Computed {dto.computedAt.replace('T', ' ').slice(0, 19)} UTC by {dto.computedBy} · software {dto.softwareVersion} · inputs <code title={dto.inputHash}>{dto.inputHash.slice(0, 16)}…</code></p>
        </div>
        <div className="flex flex-wrap gap-2">
          {canRecompute && <Button variant="quiet" onClick={() => recompute.mutate()} disabled={recompute.isPending}>{recompute.isPending ? 'Asking…' : 'Recompute now'}</Button>}
          <Button variant="quiet" onClick={() => download(`result-${id}.json`, dto)}>Export JSON</Button>
          <a className="rounded-md border border-ink-200 bg-white px-3 py-1.5 text-sm font-medium text-ink-700 hover:bg-ink-50" href={resultCsvUrl(id)} download>Export CSV</a>
        </div>
      </header>
      {recompute.error && <p className="text-sm text-disagree-600" role="alert">{describeError(recompute.error)}</p>}
      <Caution />
      {r.cautions.length > 0 && (
        <aside className="rounded-md border-l-4 border-brass-500 bg-paper-100 px-4 py-3 text-sm" role="note">
          <strong>For this campaign: </strong>{r.cautions.join(' ')}
        </aside>
      )}

      <section className="grid gap-3 md:grid-cols-3" aria-label="Main figures">
        <div className="rounded-lg border border-paper-200 bg-white p-4">
          <p className="text-xs font-medium text-ink-500">Fractional offset y (tide-corrected)</p>
          <p className="mt-1 font-mono text-base text-ink-900" data-testid="result-y">{r.fractionalOffset.yText} ± {e(r.budget.expandedUncertainty, 2)}</p>
          <p className="text-xs text-ink-500">expanded uncertainty, {coverageText(r.budget)}; u(y) = {e(r.fractionalOffset.standardUncertainty, 2)}; measured mean ratio {r.measuredRatio}</p>
        </div>
        <Quantity label="Potential difference ΔC = C_B − C_A" q={r.deltaC_m2s2} unit="m²/s²" testId="result-dc" />
        <Quantity label="Normal-height difference ΔH = H_B − H_A" q={r.deltaH_m} unit="m" testId="result-dh" />
      </section>

      <SideBySidePanel r={r} />
      <Agreement r={r} />

      <Panel title="Fractional offset over time">
        <ResultSeriesPlots series={r.timeSeries} correctedMeanY={r.fractionalOffset.y} />
        <p className="mt-2 text-xs text-ink-500">
          Tide: {r.tide.model} Mean tidal part removed: {e(r.tide.meanCorrectionY)}; peak-to-peak {e(r.tide.peakToPeakY)}; model uncertainty {e(r.tide.modelUncertaintyY)} ({r.tide.uncertaintyRule}).
        </p>
      </Panel>

      <Panel title="Frequency stability">
        <AllanPlot points={r.stability.points} title="Allan deviation of the tide-corrected comparison" />
        <p className="mt-2 text-sm" data-testid="statistical-uncertainty">
          Statistical uncertainty of the mean: <span className="font-mono">{e(r.fractionalOffset.statisticalUncertainty)}</span>
          {r.fractionalOffset.statisticalDegreesOfFreedom !== null && <> (ν = {sig(r.fractionalOffset.statisticalDegreesOfFreedom, 3)})</>} — {r.fractionalOffset.statisticalMethod}
        </p>
        {r.fractionalOffset.drift && (
          <p className="mt-1 text-xs text-ink-500">
            Linear drift (stated, not removed): {e(r.fractionalOffset.drift.slopePerDay, 3)} ± {e(r.fractionalOffset.drift.standardUncertaintyPerDay, 2)} per day (standard uncertainty). {r.fractionalOffset.drift.note}
          </p>
        )}
        <StabilityTable r={r} />
        <p className="mt-2 text-xs text-ink-500">{r.stability.note}</p>
      </Panel>

      <BudgetPanel r={r} />

      <div className="grid gap-4 lg:grid-cols-2">
        <Panel title="Tide system and conventions">
          <ul className="space-y-1 text-sm">
            <li>Results are stated in the <strong>{r.tide.system}</strong> system (as the IHRS).</li>
            {r.otherTideSystems.map((o) => (
              <li key={o.system}>In the {o.system} system: ΔC = {f(o.deltaC_m2s2, 3)} m²/s², ΔH = {f(o.deltaH_m, 4)} m.</li>
            ))}
            <li>{r.w0Convention.name}: W0 = {r.w0Convention.value_m2s2} m²/s² ({r.w0Convention.source}). {r.w0Convention.note}</li>
          </ul>
        </Panel>
        <Panel title="Data">
          <ul className="space-y-1 text-sm">
            <li>{r.samples.valid.toLocaleString('en')} valid samples of {r.samples.total.toLocaleString('en')} ({r.samples.flaggedInvalid} flagged, {r.samples.missingEpochs} missing epochs), τ0 = {sig(r.samples.tau0Seconds, 6)} s.</li>
            <li>Uptime {(100 * r.samples.uptimeFraction).toFixed(1)} % of the campaign period ({(100 * r.samples.uptimeOfSpanFraction).toFixed(1)} % of the span of the data).</li>
            <li>Reference ratio R0 = {r.referenceRatio.value} (u_rel = {e(r.referenceRatio.relativeUncertainty, 2)}; {r.referenceRatio.source}).</li>
            {r.inputFiles.map((file) => <li key={file.seriesId}>File {file.name}: {file.sampleCount.toLocaleString('en')} rows, SHA-256 <code className="break-all text-xs">{file.sha256}</code></li>)}
          </ul>
        </Panel>
      </div>

      <Panel title="Assumptions">
        <ul className="list-disc space-y-1 pl-5 text-sm" data-testid="assumptions">{r.assumptions.map((a) => <li key={a}>{a}</li>)}</ul>
      </Panel>

      <Panel title="Method">
        <p className="text-sm">{r.method.statement}</p>
        <p className="mt-1 text-xs text-ink-500">{r.deltaH_m.method} {r.fractionalOffset.meanMethod}</p>
        <ul className="mt-2 list-disc pl-5 text-xs text-ink-500">{r.method.sources.map((s) => <li key={s}>{s}</li>)}</ul>
      </Panel>
    </>
  );
}
