import { Link } from 'react-router';
import type { ClosureSummary } from '../../../shared/closures';

export const sci = (v: number, digits = 2) => {
  const [m, e] = v.toExponential(digits).split('e');
  return `${m.replace('-', '−')} × 10${String(Number(e)).replace('-', '⁻').replace(/\d/g, (d) => '⁰¹²³⁴⁵⁶⁷⁸⁹'[Number(d)])}`;
};
export const day = (iso: string) => iso.slice(0, 16).replace('T', ' ') + ' UTC';

/** Closures as a table; a loop that does not close is marked by a word and a symbol as well as its border. */
export function ClosuresTable({ items }: { items: ClosureSummary[] }) {
  return (
    <table className="w-full text-sm">
      <thead>
        <tr className="border-b border-paper-200 text-left">
          <th className="py-1">Verdict</th><th>Loop of clocks</th><th>Common time</th><th className="text-right">ε (closure)</th>
          <th className="pl-3 text-right">U (k, p)</th><th className="pl-3 text-right">Eₙ</th>
        </tr>
      </thead>
      <tbody>
        {items.map((c) => (
          <tr key={c.id} data-testid="closure-row" data-agreed={c.agreed} className={`border-b ${c.agreed ? 'border-paper-200' : 'border-l-4 border-disagree-600 bg-disagree-100 font-medium'}`}>
            <td className="whitespace-nowrap py-1 pl-1 pr-2">{c.agreed ? '✓ closes' : '✕ does not close'}</td>
            <td><Link to={`/network/closures/${c.id}`}>{c.label}</Link></td>
            <td>{day(c.commonStart)} – {day(c.commonEnd)}</td>
            <td className="whitespace-nowrap pl-2 text-right">{sci(c.closure)}</td>
            <td className="whitespace-nowrap pl-3 text-right">{sci(c.expandedUncertainty)} (k = {c.coverageFactor.toFixed(2)}, p = {(c.coverageProbability * 100).toFixed(2)} %)</td>
            <td className="whitespace-nowrap pl-3 text-right">{c.en.toFixed(2)}</td>
          </tr>
        ))}
      </tbody>
    </table>
  );
}
