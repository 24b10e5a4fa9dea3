import { useState } from 'react';
import { Link, useNavigate } from 'react-router';
import { DEFAULT_SIGMA_MM_PER_SQRT_KM } from '../../../shared/network';
import { useMe } from '../../api/account';
import { useRuns, useStartRun } from '../../api/network';
import { Button, Field, inputClass, Panel } from '../../components/ui';
import { describeError } from '../../lib/api-client';
import { fmt, when } from './format';
import { NetworkNav } from './network-nav';
import { plural } from '../../lib/format';

export function RunsPage() {
  const me = useMe();
  const [page, setPage] = useState(1);
  const runs = useRuns({ page, pageSize: 15 });
  return (
    <>
      <h1>Adjustment runs</h1>
      <NetworkNav />
      {me.data?.role === 'coordinator' && <StartRun />}
      <Panel title="Runs (kept for good, newest first)">
        <table className="min-w-full text-sm">
          <thead className="text-left text-ink-600"><tr><th className="py-1">Started</th><th>State</th><th>Inputs</th><th>Options</th><th>σ̂0</th><th>Global test</th><th>Suspects</th></tr></thead>
          <tbody>
            {runs.data?.items.map((r) => (
              <tr key={r.id} className="border-t border-paper-200">
                <td className="py-1"><Link to={`/network/runs/${r.id}`}>{when(r.createdAt)}</Link></td>
                <td>{r.state === 'running' || r.state === 'queued' ? `${r.state} ${Math.round(r.progress * 100)} %` : r.state === 'failed' ? <span className="text-disagree-600">✕ failed</span> : '✓ done'}</td>
                <td>{plural(r.inputSummary.sections, 'section')} · {plural(r.inputSummary.ties, 'tie')} · {plural(r.inputSummary.clocks, 'clock')}</td>
                <td>σ = {r.options.sigmaMmPerSqrtKm} mm/√km · {r.options.includeClocks ? 'with clocks' : 'levelling only'} · {r.options.constraint}</td>
                <td>{fmt(r.sigma0, 3)}</td>
                <td>{r.globalTestPassed === null ? '—' : r.globalTestPassed ? '✓ passed' : '✕ rejected'}</td>
                <td>{r.suspects ?? '—'}</td>
              </tr>
            ))}
          </tbody>
        </table>
        <div className="mt-2 flex gap-2 text-xs">
          <Button variant="quiet" disabled={page <= 1} onClick={() => setPage(page - 1)}>Previous</Button>
          <Button variant="quiet" disabled={(runs.data?.total ?? 0) <= page * 15} onClick={() => setPage(page + 1)}>Next</Button>
        </div>
      </Panel>
    </>
  );
}

function StartRun() {
  const start = useStartRun();
  const navigate = useNavigate();
  const [sigma, setSigma] = useState(String(DEFAULT_SIGMA_MM_PER_SQRT_KM));
  const [includeClocks, setIncludeClocks] = useState(false);
  const [constraint, setConstraint] = useState<'fixed' | 'minimum'>('fixed');
  const [error, setError] = useState<string | null>(null);
  return (
    <Panel title="Start an adjustment">
      <form className="grid gap-3 md:grid-cols-4" onSubmit={(e) => {
        e.preventDefault();
        setError(null);
        start.mutate({ sigmaMmPerSqrtKm: Number(sigma), includeClocks, constraint }, {
          onSuccess: (r) => navigate(`/network/runs/${r.id}`),
          onError: (err) => setError(describeError(err)),
        });
      }}>
        <Field label="σ of levelling (mm/√km)" hint="1 mm/√km: common practice for precise levelling">
          <input className={inputClass} value={sigma} onChange={(e) => setSigma(e.target.value)} />
        </Field>
        <Field label="Datum">
          <select className={inputClass} value={constraint} onChange={(e) => setConstraint(e.target.value as 'fixed' | 'minimum')}>
            <option value="fixed">fixed benchmarks</option><option value="minimum">minimum constraint (one benchmark)</option>
          </select>
        </Field>
        <label className="flex items-center gap-2 text-sm"><input type="checkbox" checked={includeClocks} onChange={(e) => setIncludeClocks(e.target.checked)} /> include clocks (accepted comparisons)</label>
        <div className="flex items-end"><Button type="submit" disabled={start.isPending}>Run adjustment</Button></div>
      </form>
      {error && <p role="alert" className="mt-3 rounded-md bg-disagree-100 px-3 py-2 text-sm text-disagree-800">{error}</p>}
    </Panel>
  );
}
