import { useState } from 'react';
import { useClosures } from '../../api/closures';
import { Caution, EmptyState, inputClass, Panel } from '../../components/ui';
import { ClosuresTable } from './closures-table';
import { NetworkNav } from './network-nav';

export function ClosuresPage() {
  const [page, setPage] = useState(1);
  const [failing, setFailing] = useState<'' | 'true' | 'false'>('');
  const list = useClosures({ page, pageSize: 25, failing: failing || undefined });
  const r = list.data;
  return (
    <>
      <h1>Clock-ratio closures</h1>
      <NetworkNav />
      <Panel title="Loops of simultaneous comparisons" actions={
        <div className="flex items-center gap-3 text-sm">
          <label className="flex items-center gap-2">Show
            <select aria-label="Show" className={`${inputClass} w-44`} value={failing} onChange={(e) => { setFailing(e.target.value as '' | 'true' | 'false'); setPage(1); }}>
              <option value="">every loop</option><option value="true">loops that do not close</option><option value="false">loops that close</option>
            </select>
          </label>
          <a href="/api/v1/network/closures.csv">CSV</a>
        </div>
      }>
        <p className="mb-3 text-sm text-ink-600">
          Frequency ratios multiply to 1 around a loop of clocks. ε = Σ s·y + Σ s·ln R0 over the common time of the campaigns (dimensionless);
          Eₙ = ε/U against the expected 0, |Eₙ| ≤ 1 closes. {r && <strong>{r.total} loop{r.total === 1 ? '' : 's'}{r.items.some((c) => !c.agreed) ? ', some not closing (marked ✕)' : ''}.</strong>}
        </p>
        {r && r.items.length === 0 && <EmptyState title="No closures">No loop of campaigns that ran at the same time is visible to you.</EmptyState>}
        {r && r.items.length > 0 && <ClosuresTable items={r.items} />}
        {r && r.total > 25 && (
          <p className="mt-2 flex gap-2 text-sm">
            <button type="button" disabled={page === 1} onClick={() => setPage(page - 1)}>Previous</button>
            <span>page {page} of {Math.ceil(r.total / 25)}</span>
            <button type="button" disabled={page * 25 >= r.total} onClick={() => setPage(page + 1)}>Next</button>
          </p>
        )}
      </Panel>
      <Caution />
    </>
  );
}
