import { Link, useParams } from 'react-router';
import type { ComparisonResultDto, ResultBody } from '../../../shared/results';
import { useMe } from '../../api/account';
import { resultCsvUrl, useCampaignResult, useRecomputeResult } from '../../api/results';
import { AllanPlot } from '../../components/plots/allan-plot';
import { typeset } from '../../components/typeset';
import { Button, Caution, EmptyState, Panel } from '../../components/ui';
import { describeError } from '../../lib/api-client';
import { fixed, sci, sig } from '../../lib/format';
import { TidePlot, YSeriesPlot } from './y-series-plot';

// The comparison result of one campaign: what was measured, how uncertain, and whether it agrees with geodesy.

const e = (v: number | null | undefined, digits = 3) => sci(v, digits);
const f = (v: number, decimals: number) => fixed(v, decimals);
/** Decimals so that the expanded uncertainty shows two significant digits (GUM 7.2.6 practice). */
const decimalsFor = (u: number) => Math.max(0, Math.min(9, 1 - Math.floor(Math.log10(u || 1))));

function Quantity({ label, value, unit, expanded, testId }: { label: string; value: number; unit: string; expanded: number; testId: string }) {
  const d = decimalsFor(expanded);
  return (
    <div className="rounded-lg border border-paper-200 bg-white p-4">
      <p className="text-xs font-medium text-ink-500">{typeset(label)}</p>
      <p className="mt-1 font-mono text-lg text-ink-900" data-testid={testId}>{f(value, d)} ± {f(expanded, d)} {unit}</p>
      <p className="text-xs text-ink-500">expanded uncertainty, k = 2</p>
    </div>
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
          <tr className="border-t border-paper-200"><td className="py-1.5 text-ink-600">ΔH from the clocks (H_B − H_A)</td><td className="text-right font-mono">{f(r.deltaH_m.value, 4)} ± {f(r.deltaH_m.expandedUncertainty, 4)} m (k = 2)</td></tr>
          <tr className="border-t border-paper-200"><td className="py-1.5 text-ink-600">ΔH from geodesy ({g.source})</td><td className="text-right font-mono">{f(g.deltaH_m.value, 4)} ± {f(g.deltaH_m.expandedUncertainty, 4)} m (k = 2)</td></tr>
          <tr className="border-t border-paper-200"><td className="py-1.5 text-ink-600">Difference (clocks − geodesy)</td><td className="text-right font-mono" data-testid="agreement-difference">{f(g.differenceM, 4)} ± {f(Math.hypot(r.deltaH_m.expandedUncertainty, g.deltaH_m.expandedUncertainty), 4)} m (k = 2)</td></tr>
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
            <tr className="font-medium"><td className="py-1.5">Expanded uncertainty U (k = {b.coverageFactor})</td><td /><td /><td /><td className="whitespace-nowrap px-3 text-right font-mono">{e(b.expandedUncertainty)}</td><td /></tr>
          </tbody>
        </table>
      </div>
      <p className="mt-2 text-xs text-ink-500">Effective degrees of freedom: {b.effectiveDegreesOfFreedom === null ? 'large (type B components dominate)' : b.effectiveDegreesOfFreedom.toFixed(0)}. {b.systematicCorrections}</p>
    </Panel>
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

export function ResultsPage() {
  const { id = '' } = useParams();
  const result = useCampaignResult(id);
  const recompute = useRecomputeResult(id);
  const me = useMe();
  const canRecompute = me.data?.role === 'operator' || me.data?.role === 'coordinator';
  if (result.isPending) return <p className="text-ink-500">Computing the result… (a long campaign takes a few seconds)</p>;
  if (result.isError) {
    return (
      <>
        <p className="text-sm text-ink-500"><Link to={`/campaigns/${id}`}>Back to the campaign</Link></p>
        <EmptyState title="No result for this campaign">{describeError(result.error)}</EmptyState>
      </>
    );
  }
  const dto = result.data;
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
          {canRecompute && <Button variant="quiet" onClick={() => recompute.mutate()} disabled={recompute.isPending}>{recompute.isPending ? 'Recomputing…' : 'Recompute now'}</Button>}
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
          <p className="mt-1 font-mono text-base text-ink-900" data-testid="result-y">{e(r.fractionalOffset.y, 6)} ± {e(r.budget.expandedUncertainty, 2)}</p>
          <p className="text-xs text-ink-500">expanded uncertainty, k = 2; measured mean ratio {r.measuredRatio}</p>
        </div>
        <Quantity label="Potential difference ΔC = C_B − C_A" value={r.deltaC_m2s2.value} unit="m²/s²" expanded={r.deltaC_m2s2.expandedUncertainty} testId="result-dc" />
        <Quantity label="Normal-height difference ΔH = H_B − H_A" value={r.deltaH_m.value} unit="m" expanded={r.deltaH_m.expandedUncertainty} testId="result-dh" />
      </section>

      <Agreement r={r} />

      <Panel title="Fractional offset over time">
        <YSeriesPlot series={r.timeSeries} correctedMeanY={r.fractionalOffset.y} />
        <h3 className="mt-4 text-sm font-medium text-ink-700">Tide correction alone</h3>
        <TidePlot series={r.timeSeries} />
        <p className="mt-2 text-xs text-ink-500">
          Tide: {r.tide.model} Mean tidal part removed: {e(r.tide.meanCorrectionY)}; peak-to-peak {e(r.tide.peakToPeakY)}; model uncertainty {e(r.tide.modelUncertaintyY)} ({r.tide.uncertaintyRule}).
        </p>
      </Panel>

      <Panel title="Frequency stability">
        <AllanPlot points={r.stability.points} title="Allan deviation of the tide-corrected comparison" />
        <p className="mt-2 text-xs text-ink-500">{r.stability.note} Statistical uncertainty of the mean: {e(r.fractionalOffset.statisticalUncertainty)} — {r.fractionalOffset.statisticalMethod}.</p>
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

      <Panel title="Method">
        <p className="text-sm">{r.method.statement}</p>
        <p className="mt-1 text-xs text-ink-500">{r.deltaH_m.method} {r.fractionalOffset.meanMethod}</p>
        <ul className="mt-2 list-disc pl-5 text-xs text-ink-500">{r.method.sources.map((s) => <li key={s}>{s}</li>)}</ul>
      </Panel>
    </>
  );
}
