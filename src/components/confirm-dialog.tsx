import { useEffect, useId, useRef, useState, type ReactNode } from 'react';
import { Button, Field, inputClass } from './ui';

// One confirmation step for every consequential action: it says what will happen, asks for the words the
// record needs (comment, reason, justification) and shows the server's answer when it refuses.

export type ConfirmField = {
  name: string;
  label: string;
  /** Minimum length when required; the server checks again. */
  minLength?: number;
  required?: boolean;
  hint?: ReactNode;
  rows?: number;
};

export function ConfirmDialog({
  open, title, consequences, fields = [], confirmLabel, variant = 'primary', pending, error, onConfirm, onCancel, children,
}: {
  open: boolean;
  title: string;
  /** What will happen, one line each. */
  consequences: ReactNode[];
  fields?: ConfirmField[];
  confirmLabel: string;
  variant?: 'primary' | 'danger';
  pending?: boolean;
  error?: string | null;
  onConfirm: (values: Record<string, string>) => void;
  onCancel: () => void;
  children?: ReactNode;
}) {
  const ref = useRef<HTMLDialogElement>(null);
  const titleId = useId();
  const [values, setValues] = useState<Record<string, string>>({});
  useEffect(() => {
    const d = ref.current;
    if (!d) return;
    if (open && !d.open) d.showModal();
    if (!open && d.open) d.close();
  }, [open]);
  const missing = fields.filter((f) => f.required && (values[f.name] ?? '').trim().length < (f.minLength ?? 1));
  return (
    <dialog ref={ref} aria-labelledby={titleId} data-testid="confirm-dialog" onCancel={(e) => { e.preventDefault(); onCancel(); }}
      className="m-auto max-h-[calc(100vh-2rem)] w-[min(36rem,calc(100vw-2rem))] overflow-y-auto rounded-lg border border-ink-200 bg-white p-0 text-ink-800 shadow-xl backdrop:bg-ink-900/40">
      {open && (
        <form method="dialog" className="space-y-4 p-5" onSubmit={(e) => {
          e.preventDefault();
          if (!missing.length) onConfirm(Object.fromEntries(fields.map((f) => [f.name, (values[f.name] ?? '').trim()])));
        }}>
          <h2 id={titleId} className="text-lg font-semibold text-ink-900">{title}</h2>
          <div>
            <p className="mb-1 text-xs font-semibold uppercase tracking-wide text-ink-500">What will happen</p>
            <ul className="list-disc space-y-1 pl-5 text-sm" data-testid="confirm-consequences">
              {consequences.map((c, i) => <li key={i}>{c}</li>)}
            </ul>
          </div>
          {children}
          {fields.map((f) => (
            <Field key={f.name} label={f.required ? `${f.label} (required)` : f.label} hint={f.hint}
              error={f.required && values[f.name] !== undefined && missing.includes(f) ? `at least ${f.minLength ?? 1} characters` : undefined}>
              <textarea rows={f.rows ?? 2} className={inputClass} name={f.name} value={values[f.name] ?? ''}
                onChange={(e) => setValues((v) => ({ ...v, [f.name]: e.target.value }))} />
            </Field>
          ))}
          {error && <p role="alert" className="rounded-md bg-disagree-100 px-3 py-2 text-sm text-disagree-800">{error}</p>}
          <div className="flex justify-end gap-2 border-t border-paper-200 pt-3">
            <Button type="button" variant="quiet" onClick={onCancel}>Cancel</Button>
            <Button type="submit" variant={variant} disabled={pending || missing.length > 0}>{pending ? 'Working…' : confirmLabel}</Button>
          </div>
        </form>
      )}
    </dialog>
  );
}
