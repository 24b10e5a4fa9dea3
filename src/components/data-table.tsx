import { flexRender, getCoreRowModel, useReactTable, type ColumnDef, type SortingState } from '@tanstack/react-table';
import { inputClass, Button } from './ui';

export type TableState = { page: number; pageSize: number; sort?: string; order: 'asc' | 'desc'; q: string };

/** Server-side paged, sorted and filtered table (TanStack Table in manual mode). */
export function DataTable<T>({
  columns, rows, total, state, onState, loading, filterLabel = 'Filter',
}: {
  columns: ColumnDef<T, unknown>[];
  rows: T[];
  total: number;
  state: TableState;
  onState: (s: TableState) => void;
  loading?: boolean;
  filterLabel?: string;
}) {
  const sorting: SortingState = state.sort ? [{ id: state.sort, desc: state.order === 'desc' }] : [];
  const table = useReactTable({
    data: rows,
    columns,
    getCoreRowModel: getCoreRowModel(),
    manualSorting: true,
    manualPagination: true,
    manualFiltering: true,
    state: { sorting },
    onSortingChange: (updater) => {
      const next = typeof updater === 'function' ? updater(sorting) : updater;
      onState({ ...state, page: 1, sort: next[0]?.id, order: next[0]?.desc ? 'desc' : 'asc' });
    },
    pageCount: Math.max(1, Math.ceil(total / state.pageSize)),
  });
  const pages = Math.max(1, Math.ceil(total / state.pageSize));
  return (
    <div>
      <div className="mb-2 flex items-center gap-2">
        <input aria-label={filterLabel} placeholder={`${filterLabel}…`} className={`${inputClass} max-w-xs`} value={state.q}
          onChange={(e) => onState({ ...state, q: e.target.value, page: 1 })} />
        {loading && <span className="text-xs text-ink-400">loading…</span>}
      </div>
      <div className="overflow-x-auto rounded-md border border-paper-200">
        <table className="min-w-full text-sm">
          <thead className="bg-paper-100 text-left text-ink-600">
            {table.getHeaderGroups().map((hg) => (
              <tr key={hg.id}>
                {hg.headers.map((h) => (
                  <th key={h.id} className="px-3 py-2 font-medium" aria-sort={h.column.getIsSorted() === 'asc' ? 'ascending' : h.column.getIsSorted() === 'desc' ? 'descending' : 'none'}>
                    {h.column.getCanSort() ? (
                      <button className="inline-flex items-center gap-1 hover:text-ink-900" onClick={h.column.getToggleSortingHandler()}>
                        {flexRender(h.column.columnDef.header, h.getContext())}
                        <span aria-hidden>{{ asc: '▲', desc: '▼' }[h.column.getIsSorted() as string] ?? '↕'}</span>
                      </button>
                    ) : (
                      flexRender(h.column.columnDef.header, h.getContext())
                    )}
                  </th>
                ))}
              </tr>
            ))}
          </thead>
          <tbody>
            {table.getRowModel().rows.map((r) => (
              <tr key={r.id} className="border-t border-paper-200 hover:bg-paper-50">
                {r.getVisibleCells().map((c) => (
                  <td key={c.id} className="px-3 py-2 align-top">{flexRender(c.column.columnDef.cell, c.getContext())}</td>
                ))}
              </tr>
            ))}
            {rows.length === 0 && (
              <tr><td className="px-3 py-6 text-center text-ink-400" colSpan={columns.length}>Nothing here yet.</td></tr>
            )}
          </tbody>
        </table>
      </div>
      <div className="mt-2 flex items-center justify-between text-xs text-ink-500">
        <span>{total} in all · page {state.page} of {pages}</span>
        <span className="flex gap-2">
          <Button variant="quiet" disabled={state.page <= 1} onClick={() => onState({ ...state, page: state.page - 1 })}>Previous</Button>
          <Button variant="quiet" disabled={state.page >= pages} onClick={() => onState({ ...state, page: state.page + 1 })}>Next</Button>
        </span>
      </div>
    </div>
  );
}
