import type { ReactNode } from 'react';
import type { CertificateSnapshot } from '../../../shared/certificates';
import { typeset } from '../../components/typeset';

// The certificate snapshot as readable tables: nested objects as labelled groups, lists of records as tables,
// long numeric series summarised. The raw JSON stays one click away.

const spell = (key: string) =>
  key.replace(/_m2s2$/, ' (m²/s²)').replace(/_m$/, ' (m)').replace(/([a-z])([A-Z])/g, '$1 $2').replace(/^./, (c) => c.toUpperCase()).replace(/ ([A-Z])(?=[a-z])/g, (_, c: string) => ` ${c.toLowerCase()}`);

function scalar(v: unknown): ReactNode {
  if (v === null || v === undefined || v === '') return '—';
  if (typeof v === 'boolean') return v ? 'yes' : 'no';
  if (typeof v === 'number') return <span className="font-mono">{Math.abs(v) !== 0 && (Math.abs(v) < 1e-3 || Math.abs(v) >= 1e6) ? v.toExponential(6) : String(v)}</span>;
  const s = String(v);
  return /^[0-9a-f]{64}$/.test(s) ? <span className="break-all font-mono text-xs">{s}</span> : typeset(s);
}

function Value({ value }: { value: unknown }): ReactNode {
  if (Array.isArray(value)) {
    if (value.length === 0) return '—';
    if (value.every((x) => typeof x !== 'object' || x === null)) return <ul className="list-disc pl-4">{value.map((x, i) => <li key={i}>{scalar(x)}</li>)}</ul>;
    const cols = [...new Set(value.flatMap((x) => Object.keys(x as object)))];
    return (
      <div className="overflow-x-auto">
        <table className="min-w-full text-xs">
          <thead className="text-left text-ink-500"><tr>{cols.map((c) => <th key={c} className="pr-3 font-medium">{spell(c)}</th>)}</tr></thead>
          <tbody>{value.map((row, i) => <tr key={i} className="border-t border-paper-200">{cols.map((c) => <td key={c} className="py-0.5 pr-3 align-top">{scalar((row as Record<string, unknown>)[c])}</td>)}</tr>)}</tbody>
        </table>
      </div>
    );
  }
  if (value && typeof value === 'object') {
    return (
      <dl className="grid grid-cols-[max-content_1fr] gap-x-4 gap-y-0.5">
        {Object.entries(value as Record<string, unknown>).map(([k, v]) => (
          <div key={k} className="contents"><dt className="text-ink-500">{spell(k)}</dt><dd className="min-w-0"><Value value={v} /></dd></div>
        ))}
      </dl>
    );
  }
  return scalar(value);
}

export function SnapshotTable({ snapshot }: { snapshot: CertificateSnapshot }) {
  const { timeSeries, allanDeviation, ...rest } = snapshot;
  const t = timeSeries.map((p) => p.tSeconds);
  return (
    <div className="mt-3 space-y-1 text-sm" data-testid="snapshot-table">
      <Value value={{
        ...rest,
        allanDeviation,
        timeSeries: `${timeSeries.length} points over ${((Math.max(...t) - Math.min(...t)) / 86_400).toFixed(2)} d (in the raw JSON and the PDF plot)`,
      }} />
    </div>
  );
}
