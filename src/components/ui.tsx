import type { ButtonHTMLAttributes, ReactNode } from 'react';

export function Button({ variant = 'primary', className = '', ...rest }: ButtonHTMLAttributes<HTMLButtonElement> & { variant?: 'primary' | 'quiet' | 'danger' }) {
  const styles = {
    primary: 'bg-ink-700 text-paper-50 hover:bg-ink-600 disabled:bg-ink-300 disabled:hover:bg-ink-300',
    quiet: 'bg-white text-ink-700 border border-ink-200 hover:bg-ink-50 disabled:border-dashed disabled:bg-paper-100 disabled:text-ink-300 disabled:hover:bg-paper-100',
    danger: 'bg-disagree-600 text-white hover:bg-disagree-800 disabled:bg-disagree-100 disabled:text-disagree-600 disabled:hover:bg-disagree-100',
  }[variant];
  return <button className={`rounded-md px-3 py-1.5 text-sm font-medium transition-colors disabled:cursor-not-allowed ${styles} ${className}`} {...rest} />;
}

export function Panel({ title, children, actions }: { title?: ReactNode; children: ReactNode; actions?: ReactNode }) {
  return (
    <section className="rounded-lg border border-paper-200 bg-white p-5 shadow-[0_1px_0_#e8dfcc]">
      {(title || actions) && (
        <div className="mb-3 flex items-center justify-between gap-3">
          {title && <h2>{title}</h2>}
          {actions}
        </div>
      )}
      {children}
    </section>
  );
}

/** The standing caution shown wherever a number could feed a datum or a publication. */
export function Caution({ children }: { children?: ReactNode }) {
  return (
    <aside className="rounded-md border-l-4 border-brass-500 bg-paper-100 px-4 py-3 text-sm text-ink-800" role="note">
      <strong className="font-semibold">Caution. </strong>
      {children ??
        'Expanded uncertainties state their coverage factor k, coverage probability p and effective degrees of freedom ν_eff (k = t_p(ν_eff); k = 2 only for large ν_eff). Results are for scientific comparison: verify against your national datum authority and your lab’s quality procedures before any use for heights.'}
    </aside>
  );
}

export function EmptyState({ title, children }: { title: string; children?: ReactNode }) {
  return (
    <div className="rounded-lg border border-dashed border-ink-200 bg-paper-50 p-8 text-center">
      <p className="font-medium text-ink-700">{title}</p>
      {children && <div className="mt-2 text-sm text-ink-500">{children}</div>}
    </div>
  );
}

export function Field({ label, error, children, hint }: { label: string; error?: string; hint?: ReactNode; children: ReactNode }) {
  return (
    <label className="block text-sm">
      <span className="mb-1 block font-medium text-ink-700">{label}</span>
      {children}
      {hint && !error && <span className="mt-1 block text-xs text-ink-400">{hint}</span>}
      {error && <span className="mt-1 block text-xs text-disagree-600" role="alert">{error}</span>}
    </label>
  );
}

export const inputClass = 'w-full rounded-md border border-ink-200 bg-white px-2.5 py-1.5 text-sm focus:border-ink-500';
