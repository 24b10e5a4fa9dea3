import { useFieldArray, type Control, type FieldErrors, type UseFormRegister } from 'react-hook-form';
import type { BudgetRow } from '../../../shared/registry';
import { Button, inputClass } from '../../components/ui';
import { sci, selectClass } from './registry-ui';

// Editable systematic budget table; totals follow the rows (sum of corrections, root-sum-square of uncertainties).

// Works inside any form that holds the rows under `name` ('rows' for a new version, 'budget' for a new clock).
type AnyForm = Record<string, unknown>;
const toNumber = { setValueAs: (v: string) => (v === '' ? undefined : Number(v)) };

export function rssOf(values: number[]): number {
  return Math.hypot(...values.filter((v) => Number.isFinite(v)));
}

export function BudgetEditor<F extends AnyForm>({ name, control, register: registerTyped, errors: rowErrors, rows }: {
  name: string; control: Control<F>; register: UseFormRegister<F>; errors: FieldErrors<F>[string] | undefined; rows: BudgetRow[];
}) {
  const { fields, append, remove } = useFieldArray({ control: control as unknown as Control<AnyForm>, name: name as never });
  const register = (path: string, opts?: object) => registerTyped(`${name}.${path}` as never, opts as never);
  const errors = { rows: rowErrors as unknown as FieldErrors<{ effect: string; correction: number; uncertainty: number }>[] | undefined };
  const totalCorrection = rows.reduce((s, r) => s + (Number.isFinite(Number(r?.correction)) ? Number(r.correction) : 0), 0);
  const totalU = rssOf(rows.map((r) => Number(r?.uncertainty)));
  return (
    <div>
      <div className="overflow-x-auto">
        <table className="min-w-full text-sm" aria-label="Systematic uncertainty budget">
          <thead className="text-left text-ink-500">
            <tr><th className="py-1 pr-2">Effect</th><th className="pr-2">Fractional correction</th><th className="pr-2">Fractional uncertainty (k = 1)</th><th className="pr-2">Type</th><th className="pr-2">Note</th><th /></tr>
          </thead>
          <tbody>
            {fields.map((f, i) => {
              const err = errors.rows?.[i];
              return (
                <tr key={f.id} className="border-t border-paper-200 align-top">
                  <td className="py-1 pr-2"><input aria-label={`Effect ${i + 1}`} className={inputClass} {...register(`${i}.effect`)} />{err?.effect && <span className="text-xs text-disagree-600" role="alert">{err.effect.message}</span>}</td>
                  <td className="pr-2"><input aria-label={`Correction ${i + 1}`} className={`${inputClass} font-mono`} placeholder="e.g. 4.962e-15" {...register(`${i}.correction`, toNumber)} />{err?.correction && <span className="text-xs text-disagree-600" role="alert">{err.correction.message}</span>}</td>
                  <td className="pr-2"><input aria-label={`Uncertainty ${i + 1}`} className={`${inputClass} font-mono`} placeholder="e.g. 1.1e-18" {...register(`${i}.uncertainty`, toNumber)} />{err?.uncertainty && <span className="text-xs text-disagree-600" role="alert">{err.uncertainty.message}</span>}</td>
                  <td className="pr-2"><select aria-label={`Type ${i + 1}`} className={selectClass} {...register(`${i}.type`)}><option value="B">B</option><option value="A">A</option></select></td>
                  <td className="pr-2"><input aria-label={`Note ${i + 1}`} className={inputClass} {...register(`${i}.note`)} /></td>
                  <td><Button type="button" variant="quiet" onClick={() => remove(i)} aria-label={`Remove row ${i + 1}`}>Remove</Button></td>
                </tr>
              );
            })}
          </tbody>
          <tfoot>
            <tr className="border-t-2 border-ink-200 font-semibold">
              <td className="py-1.5">Total</td>
              <td className="font-mono" data-testid="budget-total-correction">{sci(totalCorrection, 4)}</td>
              <td className="font-mono" data-testid="budget-total-uncertainty">{sci(totalU, 3)} (RSS, k = 1)</td>
              <td colSpan={3} />
            </tr>
          </tfoot>
        </table>
      </div>
      <Button type="button" variant="quiet" className="mt-2" onClick={() => append({ effect: '', correction: 0, uncertainty: 0, type: 'B', note: '' } as never)}>Add row</Button>
    </div>
  );
}

export function BudgetTable({ rows, totalCorrection, totalUncertainty }: { rows: BudgetRow[]; totalCorrection: number; totalUncertainty: number }) {
  return (
    <table className="min-w-full text-sm">
      <thead className="text-left text-ink-500"><tr><th className="py-1 pr-3">Effect</th><th className="pr-3">Correction</th><th className="pr-3">Uncertainty (k = 1)</th><th className="pr-3">Type</th><th>Note</th></tr></thead>
      <tbody>
        {rows.map((r, i) => (
          <tr key={i} className="border-t border-paper-200"><td className="py-1 pr-3">{r.effect}</td><td className="whitespace-nowrap pr-3 font-mono">{sci(r.correction, 4)}</td><td className="whitespace-nowrap pr-3 font-mono">{sci(r.uncertainty, 3)}</td><td>{r.type}</td><td className="text-ink-500">{r.note}</td></tr>
        ))}
      </tbody>
      <tfoot><tr className="border-t-2 border-ink-200 font-semibold"><td className="py-1">Total</td><td className="whitespace-nowrap font-mono">{sci(totalCorrection, 4)}</td><td className="whitespace-nowrap font-mono">{sci(totalUncertainty, 3)}</td><td colSpan={2} /></tr></tfoot>
    </table>
  );
}
