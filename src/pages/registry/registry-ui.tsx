import type { ReactNode } from 'react';
import type { FieldValues, Path, UseFormSetError } from 'react-hook-form';
import { ApiError, describeError } from '../../lib/api-client';
import { typeset } from '../../components/typeset';

// Small presentation helpers shared by the registry and campaign pages.

const SUP: Record<string, string> = { '-': '⁻', '0': '⁰', '1': '¹', '2': '²', '3': '³', '4': '⁴', '5': '⁵', '6': '⁶', '7': '⁷', '8': '⁸', '9': '⁹' };

/** 4.962e-15 → "4.962 × 10⁻¹⁵"; zero stays "0". */
export function sci(v: number | null | undefined, digits = 3): string {
  if (v === null || v === undefined || !Number.isFinite(v)) return '—';
  if (v === 0) return '0';
  const [m, e] = v.toExponential(digits - 1).split('e');
  const exp = Number(e);
  if (exp === 0) return m;
  return `${m} × 10${String(exp).split('').map((c) => SUP[c] ?? c).join('')}`;
}

/**
 * Groups a plain decimal string in threes for reading, "429228004229873.7" → "429 228 004 229 873.7" (narrow
 * no-break spaces, SI Brochure §5.4.4 style). Display only: the API and copy-paste inputs keep the plain string.
 */
export function groupDigits(decimal: string): string {
  const m = /^([+-]?)(\d+)(?:\.(\d+))?$/.exec(decimal.trim());
  if (!m) return decimal;
  const NNBSP = '\u202f';
  const int = m[2].replace(/\B(?=(\d{3})+(?!\d))/g, NNBSP);
  const frac = m[3] ? `.${m[3].replace(/(\d{3})(?=\d)/g, `$1${NNBSP}`)}` : '';
  return `${m[1]}${int}${frac}`;
}

export const fixed = (v: number | null | undefined, decimals: number) => (v === null || v === undefined || !Number.isFinite(v) ? '—' : v.toFixed(decimals));

/** Puts the API's field issues next to the form's fields; returns what could not be placed. */
export function applyServerErrors<T extends FieldValues>(e: unknown, setError: UseFormSetError<T>, known: readonly string[]): string | null {
  if (!(e instanceof ApiError)) return describeError(e);
  const rest: string[] = [];
  for (const i of e.problem.issues ?? []) {
    const path = i.path.replace(/^body\./, '');
    const field = known.find((k) => path === k || path.startsWith(`${k}.`));
    if (field) setError(path as Path<T>, { message: i.message });
    else rest.push(`${i.path}: ${i.message}`);
  }
  return rest.length || !(e.problem.issues ?? []).length ? [e.problem.detail, ...rest].join(' · ') : null;
}

export function Facts({ items }: { items: [ReactNode, ReactNode][] }) {
  return (
    <dl className="grid grid-cols-[max-content_1fr] gap-x-6 gap-y-1.5 text-sm">
      {items.map(([k, v], i) => (
        <div key={i} className="contents">
          <dt className="text-ink-500">{typeof k === 'string' ? typeset(k) : k}</dt>
          <dd className="font-medium text-ink-800">{v}</dd>
        </div>
      ))}
    </dl>
  );
}

export function FormError({ text }: { text: string | null }) {
  return text ? <p className="rounded-md bg-disagree-100 px-3 py-2 text-sm text-disagree-800" role="alert">{text}</p> : null;
}

export const selectClass = 'w-full rounded-md border border-ink-200 bg-white px-2.5 py-1.5 text-sm focus:border-ink-500';
