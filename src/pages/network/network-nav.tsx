import { NavLink } from 'react-router';

const tabs = [
  ['/network', 'Benchmarks and datums'],
  ['/network/sections', 'Levelling sections'],
  ['/network/loops', 'Loops'],
  ['/network/runs', 'Adjustment runs'],
  ['/network/reconciliation', 'Reconciliation'],
  ['/network/closures', 'Clock-ratio closures'],
  ['/network/map', 'Map'],
] as const;

/** The levelling network's own sub-navigation. */
export function NetworkNav() {
  return (
    <nav aria-label="Levelling network" className="flex flex-wrap gap-1 border-b border-paper-200 pb-2 text-sm">
      {tabs.map(([to, label]) => (
        <NavLink key={to} to={to} end className={({ isActive }) => `rounded-md px-3 py-1 no-underline ${isActive ? 'bg-ink-700 text-paper-50' : 'text-ink-700 hover:bg-paper-100'}`}>
          {label}
        </NavLink>
      ))}
    </nav>
  );
}
