import { zodResolver } from '@hookform/resolvers/zod';
import { useMemo, useState } from 'react';
import { useFieldArray, useForm, type FieldValues, type Path, type UseFormRegister } from 'react-hook-form';
import type { z } from 'zod';
import {
  budgetRequestSchema, geodesicRequestSchema, normalGravityRequestSchema, planningInputSchema, redshiftRequestSchema, transformRequestSchema,
  type PlanningInput,
} from '../../../shared/calc';
import { coverageText } from '../../../shared/number-text';
import { useBudget, useGeodesic, useNormalGravity, useNormalGravityCalc, useRedshift, useTransform } from '../../api/calc';
import { LogLogPlot } from '../../components/plots/allan-plot';
import { Button, Caution, Field, inputClass, Panel } from '../../components/ui';
import { describeError } from '../../lib/api-client';
import { fixed, sci, sig } from '../../lib/format';
import { typeset } from '../../components/typeset';

const C2 = 299_792_458 ** 2;
const num = (v: unknown) => (v === '' || v === null || v === undefined ? undefined : Number(v));
const fmt = (v: number | null | undefined, digits = 6) => sig(v, digits);
/** A calculator value in full, its standard uncertainty to two significant digits beside it. */
const withU = (value: string, u: string | null, unit = '') => (u === null ? `${value}${unit}` : `${value}${unit}, u = ${u}${unit}`);

function NumberField<T extends FieldValues>({ label, name, register, error, hint, step = 'any' }: {
  label: string; name: Path<T>; register: UseFormRegister<T>; error?: string; hint?: string; step?: string;
}) {
  return (
    <Field label={label} error={error} hint={hint}>
      <input className={inputClass} type="text" inputMode="decimal" step={step} {...register(name, { setValueAs: num })} />
    </Field>
  );
}

function ResultRow({ label, value, testId }: { label: string; value: string; testId?: string }) {
  return (
    <div className="flex flex-wrap justify-between gap-x-4 border-t border-paper-200 py-1.5 text-sm">
      <dt className="text-ink-600">{typeset(label)}</dt>
      <dd className="ml-auto text-right font-mono" data-testid={testId}>{value}</dd>
    </div>
  );
}

function RedshiftPanel() {
  const schema = redshiftRequestSchema;
  const form = useForm<z.input<typeof schema>, unknown, z.output<typeof schema>>({
    resolver: zodResolver(schema),
    defaultValues: { ratio: '1.000000000000000065', referenceRatio: '1', latitudeDeg: 46.2, normalHeightM: 12, fractionalUncertainty: 2e-18 },
  });
  const calc = useRedshift();
  const e = form.formState.errors;
  const r = calc.data;
  return (
    <Panel title="Redshift converter">
      <form className="grid grid-cols-2 gap-3" onSubmit={form.handleSubmit((v) => calc.mutate(v))} aria-label="Redshift converter">
        <Field label="Measured ratio R = ν_B/ν_A" error={e.ratio?.message}><input className={inputClass} {...form.register('ratio')} /></Field>
        <Field label="Reference ratio R₀" error={e.referenceRatio?.message} hint="1 for the same species"><input className={inputClass} {...form.register('referenceRatio')} /></Field>
        <NumberField label="u(y), standard (k = 1)" name="fractionalUncertainty" register={form.register} error={e.fractionalUncertainty?.message} hint="optional" />
        <NumberField label="Latitude (°)" name="latitudeDeg" register={form.register} error={e.latitudeDeg?.message} />
        <NumberField label="Normal height of clock A (m)" name="normalHeightM" register={form.register} error={e.normalHeightM?.message} />
        <div className="flex items-end"><Button type="submit" disabled={calc.isPending}>Convert</Button></div>
      </form>
      {calc.error && <p className="mt-3 text-sm text-disagree-600" role="alert">{describeError(calc.error)}</p>}
      {r && (
        <>
          <p className="mb-1 mt-4 text-xs text-ink-500">Each value with its standard uncertainty u (standard, k = 1).</p>
          <dl>
            <ResultRow label="Fractional offset y = R/R₀ − 1" value={withU(sci(r.fractionalOffset, 6), r.potentialDifference.uncertainty !== null ? sci(r.potentialDifference.uncertainty / C2, 2) : null)} testId="calc-y" />
            <ResultRow label="Potential difference ΔC = C_B − C_A" value={withU(fmt(r.potentialDifference.value), r.potentialDifference.uncertainty !== null ? fmt(r.potentialDifference.uncertainty, 2) : null, ' m²/s²')} testId="calc-dc" />
            <ResultRow label="Normal-height difference ΔH = H_B − H_A" value={withU(fmt(r.heightDifference.value), r.heightDifference.uncertainty !== null ? fmt(r.heightDifference.uncertainty, 2) : null, ' m')} testId="calc-dh" />
          </dl>
          <p className="mt-2 text-xs text-ink-500">{r.method}</p>
        </>
      )}
    </Panel>
  );
}

function NormalGravityPanel() {
  const schema = normalGravityRequestSchema;
  const form = useForm<z.input<typeof schema>, unknown, z.output<typeof schema>>({ resolver: zodResolver(schema), defaultValues: { latitudeDeg: 45, heightM: 0 } });
  const calc = useNormalGravityCalc();
  const e = form.formState.errors;
  return (
    <Panel title="Normal gravity (GRS80)">
      <form className="grid grid-cols-3 gap-3" onSubmit={form.handleSubmit((v) => calc.mutate(v))} aria-label="Normal gravity">
        <NumberField label="Latitude (°)" name="latitudeDeg" register={form.register} error={e.latitudeDeg?.message} />
        <NumberField label="Height (m)" name="heightM" register={form.register} error={e.heightM?.message} />
        <div className="flex items-end"><Button type="submit">Compute</Button></div>
      </form>
      {calc.error && <p className="mt-3 text-sm text-disagree-600" role="alert">{describeError(calc.error)}</p>}
      {calc.data && (
        <dl className="mt-4">
          <ResultRow label="Normal gravity γ" value={`${calc.data.gravity.toFixed(8)} m/s²`} testId="calc-gamma" />
          <ResultRow label="Mean normal gravity γ̄ to this height" value={`${calc.data.meanGravityToHeight.toFixed(8)} m/s²`} />
        </dl>
      )}
    </Panel>
  );
}

function GeodesicPanel() {
  const schema = geodesicRequestSchema;
  const form = useForm<z.input<typeof schema>, unknown, z.output<typeof schema>>({
    resolver: zodResolver(schema),
    defaultValues: { from: { latitudeDeg: 46.2, longitudeDeg: 6.1 }, to: { latitudeDeg: 47.9, longitudeDeg: 8.9 } },
  });
  const calc = useGeodesic();
  const e = form.formState.errors;
  return (
    <Panel title="Geodesic on GRS80">
      <form className="grid grid-cols-2 gap-3" onSubmit={form.handleSubmit((v) => calc.mutate(v))} aria-label="Geodesic">
        <NumberField label="From latitude (°)" name="from.latitudeDeg" register={form.register} error={e.from?.latitudeDeg?.message} />
        <NumberField label="From longitude (°)" name="from.longitudeDeg" register={form.register} error={e.from?.longitudeDeg?.message} />
        <NumberField label="To latitude (°)" name="to.latitudeDeg" register={form.register} error={e.to?.latitudeDeg?.message} />
        <NumberField label="To longitude (°)" name="to.longitudeDeg" register={form.register} error={e.to?.longitudeDeg?.message} />
        <div><Button type="submit">Compute</Button></div>
      </form>
      {calc.error && <p className="mt-3 text-sm text-disagree-600" role="alert">{describeError(calc.error)}</p>}
      {calc.data && (
        <dl className="mt-4">
          <ResultRow label="Distance" value={`${calc.data.distanceM.toFixed(3)} m`} testId="calc-distance" />
          <ResultRow label="Azimuth at the start" value={`${fixed(calc.data.azimuthFromDeg, 6)}°`} />
          <ResultRow label="Azimuth at the end (direction of travel)" value={`${fixed(calc.data.azimuthToDeg, 6)}°`} />
        </dl>
      )}
    </Panel>
  );
}

function TransformPanel() {
  const schema = transformRequestSchema;
  const [text, setText] = useState('6.1, 46.2, 420');
  const form = useForm<z.input<typeof schema>, unknown, z.output<typeof schema>>({
    resolver: zodResolver(schema),
    defaultValues: { from: 'EPSG:4937', to: 'EPSG:4936', coordinates: [6.1, 46.2, 420] },
  });
  const calc = useTransform();
  const e = form.formState.errors;
  return (
    <Panel title="Coordinate transformation">
      <form className="grid grid-cols-2 gap-3" onSubmit={form.handleSubmit((v) => calc.mutate(v))} aria-label="Coordinate transformation">
        <Field label="From (EPSG code or PROJ string)" error={e.from?.message}><input className={inputClass} {...form.register('from')} /></Field>
        <Field label="To (EPSG code or PROJ string)" error={e.to?.message}><input className={inputClass} {...form.register('to')} /></Field>
        <Field label="Coordinates" hint="longitude, latitude[, height] for geographic; E, N projected; X, Y, Z geocentric" error={e.coordinates?.message ?? e.coordinates?.[0]?.message}>
          <input
            className={inputClass}
            value={text}
            onChange={(ev) => {
              setText(ev.target.value);
              form.setValue('coordinates', ev.target.value.split(/[,;\s]+/).filter(Boolean).map(Number));
            }}
          />
        </Field>
        <div className="flex items-end"><Button type="submit">Transform</Button></div>
      </form>
      {calc.error && <p className="mt-3 text-sm text-disagree-600" role="alert">{describeError(calc.error)}</p>}
      {calc.data && (
        <div className="mt-4 text-sm">
          <p className="text-xs text-ink-500">In {calc.data.targetCrs}:</p>
          <dl data-testid="calc-transformed">
            {calc.data.coordinates.map((c, i) => {
              const axis = calc.data.axes[i] ?? { name: `value ${i + 1}`, unit: '' };
              // Degrees to 1e-9 (≈ 0.1 mm on the ground) and metres to 0.1 mm.
              const text = axis.unit === '°' ? `${fixed(c, 9)}°` : `${fixed(c, 4)} ${axis.unit}`;
              return <ResultRow key={axis.name} label={axis.name} value={text} />;
            })}
          </dl>
          <ul className="mt-2 list-disc pl-5 text-xs text-ink-500">{calc.data.assumptions.map((a) => <li key={a}>{a}</li>)}</ul>
        </div>
      )}
    </Panel>
  );
}

/** Expanded (k = 2) height uncertainty against averaging time: systematic terms add in quadrature to σ_y(1 s)/√τ. */
export function planningCurve(p: PlanningInput, meanGravity: number, taus: number[]) {
  const floor2 = p.systematicA ** 2 + p.systematicB ** 2 + p.link ** 2 + p.referenceRatio ** 2;
  return taus.map((tau) => {
    const uY = Math.sqrt(floor2 + p.sigmaYAt1s ** 2 / tau);
    return { x: tau, y: (2 * C2 * uY) / meanGravity };
  });
}

function PlanningPanel() {
  const schema = planningInputSchema;
  const form = useForm<PlanningInput>({
    resolver: zodResolver(schema),
    mode: 'onChange',
    defaultValues: { latitudeADeg: 46.2, normalHeightAM: 12, latitudeBDeg: 47.9, normalHeightBM: 612, systematicA: 2e-18, systematicB: 3e-18, sigmaYAt1s: 5e-16, link: 1e-18, referenceRatio: 0 },
  });
  const [input, setInput] = useState<PlanningInput>(form.getValues());
  const e = form.formState.errors;
  const midLat = (input.latitudeADeg + input.latitudeBDeg) / 2;
  const midH = (input.normalHeightAM + input.normalHeightBM) / 2;
  const gamma = useNormalGravity({ latitudeDeg: midLat, heightM: midH });
  const taus = useMemo(() => Array.from({ length: 61 }, (_, i) => 10 ** (i / 10)), []);
  const g = gamma.data?.meanGravityToHeight;
  const curve = g ? planningCurve(input, g, taus) : [];
  const floor = g ? (2 * C2 * Math.hypot(input.systematicA, input.systematicB, input.link, input.referenceRatio)) / g : null;
  const crossing = Math.hypot(input.systematicA, input.systematicB, input.link, input.referenceRatio) > 0
    ? (input.sigmaYAt1s / Math.hypot(input.systematicA, input.systematicB, input.link, input.referenceRatio)) ** 2 : null;
  const expectedY = g ? ((input.normalHeightBM - input.normalHeightAM) * g) / C2 : null;
  const target1cm = curve.find((c) => c.y <= 0.01);
  return (
    <Panel title="Planning: achievable height uncertainty">
      <form className="grid grid-cols-3 gap-3" onSubmit={form.handleSubmit((v) => setInput(v))} aria-label="Planning">
        <NumberField label="Site A latitude (°)" name="latitudeADeg" register={form.register} error={e.latitudeADeg?.message} />
        <NumberField label="Site A normal height (m)" name="normalHeightAM" register={form.register} error={e.normalHeightAM?.message} />
        <NumberField label="Clock A systematic u (k = 1)" name="systematicA" register={form.register} error={e.systematicA?.message} />
        <NumberField label="Site B latitude (°)" name="latitudeBDeg" register={form.register} error={e.latitudeBDeg?.message} />
        <NumberField label="Site B normal height (m)" name="normalHeightBM" register={form.register} error={e.normalHeightBM?.message} />
        <NumberField label="Clock B systematic u (k = 1)" name="systematicB" register={form.register} error={e.systematicB?.message} />
        <NumberField label="σ_y at 1 s, white FM" name="sigmaYAt1s" register={form.register} error={e.sigmaYAt1s?.message} hint="combined instability of the comparison" />
        <NumberField label="Link u (k = 1)" name="link" register={form.register} error={e.link?.message} />
        <NumberField label="Reference ratio u (k = 1)" name="referenceRatio" register={form.register} error={e.referenceRatio?.message} hint="0 for the same species" />
        <div><Button type="submit">Plot</Button></div>
      </form>
      {curve.length > 0 && (
        <div className="mt-4">
          <LogLogPlot
            title="Expanded height uncertainty against averaging time"
            xLabel="Averaging time τ (s)"
            yLabel="U(ΔH), k = 2 (m)"
            series={[{ label: 'U(ΔH), k = 2', kind: 'line', colour: 'stroke-ink-700 fill-none', points: curve }]}
          />
          <dl className="mt-2">
            <ResultRow label="Expected y for these heights (≈ ΔH·γ̄/c²)" value={sci(expectedY, 3)} />
            <ResultRow label="Systematic floor U(ΔH), k = 2 (p = 95.45 %, ν_eff infinite)" value={`${fmt(floor, 3)} m`} testId="plan-floor" />
            <ResultRow label="Averaging time where statistics equal the systematics" value={crossing ? `${fmt(crossing, 3)} s (${fmt(crossing / 86_400, 3)} d)` : '—'} />
            <ResultRow label="Averaging time for U(ΔH) ≤ 1 cm" value={target1cm ? `${fmt(target1cm.x, 2)} s` : 'not reached within 10⁶ s'} />
          </dl>
          <p className="mt-2 text-xs text-ink-500">u(y)² = u_A² + u_B² + u_link² + u_ref² + σ_y(1 s)²/τ (white frequency noise, no dead time); U(ΔH) = 2·c²·u(y)/γ̄ (k = 2, p = 95.45 %: every input is taken as known, ν_eff infinite — a campaign result states its own k from ν_eff) with GRS80 mean normal gravity at the mid-point ({g?.toFixed(5)} m/s²).</p>
        </div>
      )}
    </Panel>
  );
}

function BudgetPanel() {
  const schema = budgetRequestSchema;
  const form = useForm<z.input<typeof schema>, unknown, z.output<typeof schema>>({
    resolver: zodResolver(schema),
    defaultValues: {
      components: [
        { name: 'Statistical (type A)', standardUncertainty: 1.5e-18, sensitivity: 1, degreesOfFreedom: 12 },
        { name: 'Clock A systematic', standardUncertainty: 2e-18, sensitivity: -1, degreesOfFreedom: null },
        { name: 'Clock B systematic', standardUncertainty: 3e-18, sensitivity: 1, degreesOfFreedom: null },
      ],
      coverageProbability: 0.9545,
    },
  });
  const rows = useFieldArray({ control: form.control, name: 'components' });
  const calc = useBudget();
  const e = form.formState.errors;
  const r = calc.data;
  return (
    <Panel title="Uncertainty budget: ν_eff and coverage factor">
      <form onSubmit={form.handleSubmit((v) => calc.mutate(v))} aria-label="Uncertainty budget">
        <table className="min-w-full text-sm">
          <thead className="text-left text-ink-500"><tr><th>Component</th><th className="px-2">u(x_i)</th><th className="px-2">c_i</th><th className="px-2">ν_i (empty = ∞)</th><th /></tr></thead>
          <tbody>
            {rows.fields.map((row, i) => (
              <tr key={row.id}>
                <td><input aria-label={`Component ${i + 1} name`} className={inputClass} {...form.register(`components.${i}.name`)} /></td>
                <td className="px-2"><input aria-label={`Component ${i + 1} standard uncertainty`} className={inputClass} inputMode="decimal" {...form.register(`components.${i}.standardUncertainty`, { setValueAs: num })} /></td>
                <td className="px-2"><input aria-label={`Component ${i + 1} sensitivity`} className={inputClass} inputMode="decimal" {...form.register(`components.${i}.sensitivity`, { setValueAs: num })} /></td>
                <td className="px-2"><input aria-label={`Component ${i + 1} degrees of freedom`} className={inputClass} inputMode="decimal" {...form.register(`components.${i}.degreesOfFreedom`, { setValueAs: (v) => num(v) ?? null })} /></td>
                <td><Button variant="quiet" type="button" onClick={() => rows.remove(i)} disabled={rows.fields.length <= 1}>Remove</Button></td>
              </tr>
            ))}
          </tbody>
        </table>
        {e.components && <p className="text-sm text-disagree-600" role="alert">Check the rows: every u must be a non-negative number, every ν positive.</p>}
        <div className="mt-2 flex flex-wrap items-end gap-3">
          <Button variant="quiet" type="button" onClick={() => rows.append({ name: `Component ${rows.fields.length + 1}`, standardUncertainty: 0, sensitivity: 1, degreesOfFreedom: null })}>Add a row</Button>
          <NumberField label="Coverage probability p" name="coverageProbability" register={form.register} error={e.coverageProbability?.message} hint="0.9545 gives k = 2 for large ν_eff" />
          <Button type="submit" disabled={calc.isPending}>Combine</Button>
        </div>
      </form>
      {calc.error && <p className="mt-3 text-sm text-disagree-600" role="alert">{describeError(calc.error)}</p>}
      {r && (
        <dl className="mt-3">
          <ResultRow label="Combined standard uncertainty u_c" value={sci(r.combinedStandardUncertainty, 3)} testId="budget-uc" />
          <ResultRow label="Effective degrees of freedom ν_eff (Welch–Satterthwaite)" value={r.effectiveDegreesOfFreedom === null ? 'infinite' : sig(r.effectiveDegreesOfFreedom, 4)} testId="budget-nu" />
          <ResultRow label="Expanded uncertainty U = k·u_c" value={`${sci(r.expandedUncertainty, 3)} (${coverageText(r)})`} testId="budget-u" />
          <p className="mt-2 text-xs text-ink-500">{r.method}</p>
        </dl>
      )}
    </Panel>
  );
}

export function CalculatorPage() {
  return (
    <>
      <h1>Calculator</h1>
      <Caution />
      <div className="grid gap-4 xl:grid-cols-2">
        <RedshiftPanel />
        <NormalGravityPanel />
        <GeodesicPanel />
        <TransformPanel />
      </div>
      <BudgetPanel />
      <PlanningPanel />
    </>
  );
}
