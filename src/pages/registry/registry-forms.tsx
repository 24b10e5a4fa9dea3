import { zodResolver } from '@hookform/resolvers/zod';
import { useState, type ReactNode } from 'react';
import { useForm, type FieldErrors, type Resolver, type UseFormRegister, type UseFormWatch } from 'react-hook-form';
import { z } from 'zod';
import type { Me } from '../../../shared/auth';
import {
  registryTideSystems,
  clockKindLabels, clockKinds, speciesCodes, speciesLabels, updateClockSchema, updateLinkSchema, updateSiteSchema,
  type Clock, type Link as FibreLink, type ReferenceFrequency, type Site, type UpdateSite,
} from '../../../shared/registry';
import { useCrsList, useGrids, useReferences, useUpdateClock, useUpdateLink, useUpdateSite } from '../../api/registry';
import { Button, Field, inputClass, Panel } from '../../components/ui';
import { applyServerErrors, FormError, selectClass } from './registry-ui';

// Field groups shared by the create forms (list pages) and the edit forms (detail pages); the shared zod schemas
// decide validity, the server decides who may change what — the visibility rules below only mirror it.

export const num = { setValueAs: (v: string) => (v === '' || v === undefined ? undefined : Number(v)) };

// ---------- who may change a record (mirrors registry.service: requireSameInstitute / requireLinkInstitute) ----------

export function canChangeInstituteRecord(me: Me | null | undefined, instituteId: string): boolean {
  return me?.role === 'coordinator' || (me?.role === 'operator' && me.institute?.id === instituteId);
}
export function canChangeLink(me: Me | null | undefined, link: FibreLink): boolean {
  const code = me?.institute?.code;
  return me?.role === 'coordinator' || (me?.role === 'operator' && !!code && (link.siteA.instituteCode === code || link.siteB.instituteCode === code));
}

// ---------- sites ----------

export type SiteForm = {
  name: string; instituteId?: string; referencePoint: string; crs: string; coordinates: (number | undefined)[]; ellipsoidalHeightUncertaintyM: number;
  ellipsoidalCrustSystem?: '' | (typeof registryTideSystems)[number] | null;
  quasigeoid: { source: 'entered' | 'grid'; heightM?: number; uncertaintyM?: number; gridId?: string; tideSystem?: '' | (typeof registryTideSystems)[number] | null };
  benchmarkTie: { benchmarkCode?: string; heightDifferenceM?: number; uncertaintyM?: number; deltaC_m2s2?: number; uncertaintyC_m2s2?: number; source?: string } | null;
};

/** The shared schema decides; this only turns the flat form into its shape (empty height, empty tie → none). */
export function siteFormSchema<S extends z.ZodType>(schema: S) {
  return z.preprocess((raw) => {
    const v = raw as Record<string, unknown> & { coordinates: unknown[]; benchmarkTie: { benchmarkCode?: string } | null; quasigeoid: Record<string, unknown> };
    const coordinates = (v.coordinates ?? []).filter((c) => c !== undefined && c !== '' && !(typeof c === 'number' && Number.isNaN(c)));
    const benchmarkTie = v.benchmarkTie && v.benchmarkTie.benchmarkCode ? v.benchmarkTie : null;
    const quasigeoid = v.quasigeoid?.source === 'grid'
      ? { source: 'grid', gridId: v.quasigeoid.gridId }
      : { source: 'entered', heightM: v.quasigeoid?.heightM, uncertaintyM: v.quasigeoid?.uncertaintyM, tideSystem: v.quasigeoid?.tideSystem || null };
    return { ...v, coordinates, benchmarkTie, quasigeoid, instituteId: v.instituteId || undefined, ellipsoidalCrustSystem: v.ellipsoidalCrustSystem || null };
  }, schema);
}
export const siteFieldNames = ['name', 'instituteId', 'referencePoint', 'crs', 'coordinates', 'ellipsoidalHeightUncertaintyM', 'ellipsoidalCrustSystem', 'quasigeoid', 'benchmarkTie'] as const;

const axisLabels: Record<string, [string, string, string]> = {
  projected: ['Easting E (m)', 'Northing N (m)', 'Ellipsoidal height h (m)'],
  geocentric: ['X (m)', 'Y (m)', 'Z (m)'],
  geographic2D: ['Longitude (°)', 'Latitude (°)', 'Ellipsoidal height h (m), optional'],
  geographic3D: ['Longitude (°)', 'Latitude (°)', 'Ellipsoidal height h (m)'],
};

/** Everything of a site but its institute (the create form adds that for the coordinating institute). */
export function SiteFields({ register, watch, errors, instituteField }: {
  register: UseFormRegister<SiteForm>; watch: UseFormWatch<SiteForm>; errors: FieldErrors<SiteForm>; instituteField?: ReactNode;
}) {
  const crs = useCrsList();
  const grids = useGrids();
  const crsCode = watch('crs');
  const zetaSource = watch('quasigeoid.source');
  const kind = crs.data?.find((c) => c.code === crsCode)?.kind ?? (crsCode?.includes('+proj=longlat') ? 'geographic3D' : crsCode?.includes('+proj=geocent') ? 'geocentric' : 'projected');
  const labels = axisLabels[kind];
  const e = errors as Record<string, { message?: string } & Record<string, { message?: string }>>;
  return (
    <>
      <div className="grid gap-3 md:grid-cols-3">
        <Field label="Site name" error={e.name?.message}><input className={inputClass} {...register('name')} /></Field>
        {instituteField}
        <div className="md:col-span-2"><Field label="Reference point (the point whose potential is meant)" error={e.referencePoint?.message}><input className={inputClass} {...register('referencePoint')} /></Field></div>
      </div>
      <fieldset className="grid gap-3 md:grid-cols-4">
        <legend className="mb-1 text-sm font-semibold text-ink-700">Coordinates as you have them</legend>
        <Field label="Coordinate reference system" error={e.crs?.message} hint="EPSG code from the list, or a PROJ string (+proj=…)">
          <input className={inputClass} list="crs-list" {...register('crs')} />
          <datalist id="crs-list">{crs.data?.map((c) => <option key={c.code} value={c.code}>{c.label}</option>)}</datalist>
        </Field>
        {labels.map((label, i) => (
          <Field key={i} label={label} error={(e.coordinates as unknown as Record<number, { message?: string }> | undefined)?.[i]?.message ?? (i === 0 ? e.coordinates?.message : undefined)}>
            <input className={inputClass} inputMode="decimal" {...register(`coordinates.${i}` as const, num)} />
          </Field>
        ))}
        <Field label="u(h), standard uncertainty (m)" error={e.ellipsoidalHeightUncertaintyM?.message}><input className={inputClass} {...register('ellipsoidalHeightUncertaintyM', num)} /></Field>
        <Field label="Crust (tide) system of h">
          <select className={selectClass} {...register('ellipsoidalCrustSystem')} data-testid="crust-system">
            <option value="">not stated (no comparison until stated)</option>
            <option value="tide-free">tide-free (GNSS / ITRF convention)</option>
            <option value="mean-tide">mean-tide (= zero-tide crust)</option>
          </select>
        </Field>
      </fieldset>
      <fieldset className="grid gap-3 md:grid-cols-4">
        <legend className="mb-1 text-sm font-semibold text-ink-700">Quasigeoid height ζ</legend>
        <Field label="Source">
          <select className={selectClass} {...register('quasigeoid.source')}>
            <option value="entered">I enter ζ</option>
            <option value="grid">Interpolate from a grid</option>
          </select>
        </Field>
        {zetaSource === 'grid' ? (
          <Field label="Grid" error={e.quasigeoid?.gridId?.message ?? e.quasigeoid?.message}>
            <select className={selectClass} {...register('quasigeoid.gridId')}>
              <option value="">choose…</option>
              {grids.data?.map((g) => <option key={g.id} value={g.id}>{g.name} (u {g.uncertaintyM} m, k = 1; {g.tideSystem ?? 'tide system not stated'})</option>)}
            </select>
          </Field>
        ) : (
          <>
            <Field label="ζ (m)" error={e.quasigeoid?.heightM?.message}><input className={inputClass} {...register('quasigeoid.heightM', num)} /></Field>
            <Field label="u(ζ) (m)" error={e.quasigeoid?.uncertaintyM?.message}><input className={inputClass} {...register('quasigeoid.uncertaintyM', num)} /></Field>
            <Field label="Tide system of ζ">
              <select className={selectClass} {...register('quasigeoid.tideSystem')} data-testid="zeta-tide-system">
                <option value="">not stated</option>{registryTideSystems.map((t) => <option key={t}>{t}</option>)}
              </select>
            </Field>
          </>
        )}
      </fieldset>
      <fieldset className="grid gap-3 md:grid-cols-4">
        <legend className="mb-1 text-sm font-semibold text-ink-700">Local tie to a levelling benchmark (optional)</legend>
        <Field label="Benchmark code" error={e.benchmarkTie?.benchmarkCode?.message}><input className={inputClass} {...register('benchmarkTie.benchmarkCode')} /></Field>
        <Field label="Height difference site − benchmark (m)" error={e.benchmarkTie?.heightDifferenceM?.message}><input className={inputClass} {...register('benchmarkTie.heightDifferenceM', num)} /></Field>
        <Field label="u (m)" error={e.benchmarkTie?.uncertaintyM?.message}><input className={inputClass} {...register('benchmarkTie.uncertaintyM', num)} /></Field>
      </fieldset>
    </>
  );
}

function siteToForm(s: Site): SiteForm {
  return {
    name: s.name,
    referencePoint: s.referencePoint,
    crs: s.entered.crs,
    coordinates: [...s.entered.coordinates],
    ellipsoidalHeightUncertaintyM: s.grs80.ellipsoidalHeightUncertaintyM,
    ellipsoidalCrustSystem: s.ellipsoidalCrustSystem ?? '',
    quasigeoid: s.quasigeoid.source === 'grid'
      ? { source: 'grid', gridId: s.quasigeoid.gridId ?? undefined }
      : { source: 'entered', heightM: s.quasigeoid.heightM, uncertaintyM: s.quasigeoid.uncertaintyM, tideSystem: s.quasigeoid.tideSystem ?? '' },
    // a ΔC tie (set on the site page) passes through unchanged; this form edits Δh ties
    benchmarkTie: s.benchmarkTie
      ? Object.fromEntries(Object.entries(s.benchmarkTie).filter(([k, v]) => v !== null && k !== 'quantity'))
      : {},
  };
}

const editSiteSchema = siteFormSchema(updateSiteSchema);

/** "Edit" section of a site page: sends the whole form; the server recomputes GRS80 values and ζ from a grid. */
export function EditSitePanel({ site }: { site: Site }) {
  const [open, setOpen] = useState(false);
  return (
    <Panel title="Edit" actions={open ? undefined : <Button variant="quiet" onClick={() => setOpen(true)}>Edit site</Button>}>
      {open ? <EditSiteForm site={site} onDone={() => setOpen(false)} /> : <p className="text-sm text-ink-500">Change the name, reference point, coordinates, quasigeoid height or benchmark tie. Converted values are recomputed on saving.</p>}
    </Panel>
  );
}

function EditSiteForm({ site, onDone }: { site: Site; onDone: () => void }) {
  const update = useUpdateSite();
  const [formError, setFormError] = useState<string | null>(null);
  const { register, handleSubmit, watch, setError, formState: { errors } } = useForm<SiteForm, unknown, UpdateSite>({
    resolver: zodResolver(editSiteSchema as never) as unknown as Resolver<SiteForm, unknown, UpdateSite>,
    defaultValues: siteToForm(site),
  });
  return (
    <form className="space-y-4" data-testid="edit-site-form" onSubmit={handleSubmit((body) => {
      setFormError(null);
      update.mutate({ id: site.id, body }, {
        onSuccess: onDone,
        onError: (err) => setFormError(applyServerErrors(err, setError, siteFieldNames)),
      });
    })}>
      <SiteFields register={register} watch={watch} errors={errors} />
      <EditFormFooter error={formError} saving={update.isPending} onCancel={onDone} />
    </form>
  );
}

/** Shared foot of the edit forms: the form-level error, save and cancel. */
function EditFormFooter({ error, saving, onCancel }: { error: string | null; saving: boolean; onCancel: () => void }) {
  return (
    <>
      <FormError text={error} />
      <div className="flex gap-2">
        <Button type="submit" disabled={saving}>Save changes</Button>
        <Button type="button" variant="quiet" onClick={onCancel}>Cancel</Button>
      </div>
    </>
  );
}

// ---------- clocks ----------

type UpdateClock = z.input<typeof updateClockSchema>;

export type ClockFieldValues = { name: string; kind: (typeof clockKinds)[number]; species: (typeof speciesCodes)[number]; nominalFrequencyHz: string; notes: string; mobility: 'stationary' | 'transportable' };
export const clockFieldNames = ['name', 'kind', 'species', 'nominalFrequencyHz', 'notes', 'mobility'] as const;

/** Name, kind, species, nominal frequency and notes; the site and the budget stay with the caller. */
export function ClockFields({ register, errors, siteField, species }: { register: UseFormRegister<ClockFieldValues>; errors: FieldErrors<ClockFieldValues>; siteField?: ReactNode; species?: string }) {
  const references = useReferences();
  const hint = nominalFrequencyHint(species, references.data);
  return (
    <div className="grid gap-3 md:grid-cols-3">
      <Field label="Clock name" error={errors.name?.message}><input className={inputClass} {...register('name')} /></Field>
      {siteField}
      <Field label="Kind" error={errors.kind?.message}>
        <select className={selectClass} {...register('kind')}>{clockKinds.map((k) => <option key={k} value={k}>{clockKindLabels[k]}</option>)}</select>
      </Field>
      <Field label="Species / transition" error={errors.species?.message}>
        <select className={selectClass} {...register('species')}>{speciesCodes.map((s) => <option key={s} value={s}>{speciesLabels[s]}</option>)}</select>
      </Field>
      <Field label="Nominal frequency (Hz, decimal)" hint={hint} error={errors.nominalFrequencyHz?.message}>
        <input className={`${inputClass} font-mono`} inputMode="decimal" {...register('nominalFrequencyHz')} />
      </Field>
      <Field label="Notes" error={errors.notes?.message}><input className={inputClass} {...register('notes')} /></Field>
      <Field label="Mobility" hint="a transportable clock records where it stood and when (deployments)" error={errors.mobility?.message}>
        <select className={selectClass} {...register('mobility')} data-testid="clock-mobility">
          <option value="stationary">Stationary (always at its site)</option>
          <option value="transportable">Transportable (deployments)</option>
        </select>
      </Field>
    </div>
  );
}

/** The hint beside the nominal frequency: the reference frequency in use for the chosen species, if the table has one. */
export function nominalFrequencyHint(species: string | undefined, references: ReferenceFrequency[] | undefined): string {
  const inUse = species ? references?.find((r) => r.species === species && r.inUse) : undefined;
  return inUse
    ? `up to 20 significant digits; reference value for ${inUse.speciesLabel}: ${inUse.frequencyHz}`
    : 'up to 20 significant digits (no reference value in use for this species)';
}

export function EditClockPanel({ clock }: { clock: Clock }) {
  const [open, setOpen] = useState(false);
  return (
    <Panel title="Edit" actions={open ? undefined : <Button variant="quiet" onClick={() => setOpen(true)}>Edit clock</Button>}>
      {open ? <EditClockForm clock={clock} onDone={() => setOpen(false)} /> : <p className="text-sm text-ink-500">Change the name, kind, species or nominal frequency. The budget has its own versioned editor above.</p>}
    </Panel>
  );
}

function EditClockForm({ clock, onDone }: { clock: Clock; onDone: () => void }) {
  const update = useUpdateClock();
  const [formError, setFormError] = useState<string | null>(null);
  const { register, handleSubmit, watch, setError, formState: { errors } } = useForm<ClockFieldValues, unknown, UpdateClock>({
    resolver: zodResolver(updateClockSchema) as unknown as Resolver<ClockFieldValues, unknown, UpdateClock>,
    defaultValues: { name: clock.name, kind: clock.kind, species: clock.species, nominalFrequencyHz: clock.nominalFrequencyHz, notes: clock.notes, mobility: clock.mobility },
  });
  return (
    <form className="space-y-4" data-testid="edit-clock-form" onSubmit={handleSubmit((body) => {
      setFormError(null);
      update.mutate({ id: clock.id, body }, { onSuccess: onDone, onError: (err) => setFormError(applyServerErrors(err, setError, clockFieldNames)) });
    })}>
      <ClockFields register={register} errors={errors} species={watch('species')} />
      <EditFormFooter error={formError} saving={update.isPending} onCancel={onDone} />
    </form>
  );
}

// ---------- fibre links ----------

type UpdateLink = z.input<typeof updateLinkSchema>;

export type LinkFieldValues = { name: string; fibreLengthKm: number; fractionalUncertainty: number; notes: string };
export const linkFieldNames = ['name', 'fibreLengthKm', 'fractionalUncertainty', 'notes'] as const;

/** Name, fibre length, link uncertainty and notes; the two ends stay with the caller (fixed once created). */
export function LinkFields({ register, errors, siteFields }: { register: UseFormRegister<LinkFieldValues>; errors: FieldErrors<LinkFieldValues>; siteFields?: ReactNode }) {
  return (
    <>
      <Field label="Link name" error={errors.name?.message}><input className={inputClass} {...register('name')} /></Field>
      {siteFields}
      <Field label="Fibre length (km)" error={errors.fibreLengthKm?.message}><input className={inputClass} inputMode="decimal" {...register('fibreLengthKm', num)} /></Field>
      <Field label="Link fractional uncertainty (k = 1)" hint="e.g. 3e-19" error={errors.fractionalUncertainty?.message}><input className={`${inputClass} font-mono`} {...register('fractionalUncertainty', num)} /></Field>
      <Field label="Notes" error={errors.notes?.message}><input className={inputClass} {...register('notes')} /></Field>
    </>
  );
}

export function EditLinkPanel({ link }: { link: FibreLink }) {
  const [open, setOpen] = useState(false);
  return (
    <Panel title="Edit" actions={open ? undefined : <Button variant="quiet" onClick={() => setOpen(true)}>Edit link</Button>}>
      {open ? <EditLinkForm link={link} onDone={() => setOpen(false)} /> : <p className="text-sm text-ink-500">Change the name, fibre length, link uncertainty or notes. The two sites are fixed once the link exists.</p>}
    </Panel>
  );
}

function EditLinkForm({ link, onDone }: { link: FibreLink; onDone: () => void }) {
  const update = useUpdateLink();
  const [formError, setFormError] = useState<string | null>(null);
  const { register, handleSubmit, setError, formState: { errors } } = useForm<LinkFieldValues, unknown, UpdateLink>({
    resolver: zodResolver(updateLinkSchema) as unknown as Resolver<LinkFieldValues, unknown, UpdateLink>,
    defaultValues: { name: link.name, fibreLengthKm: link.fibreLengthKm, fractionalUncertainty: link.fractionalUncertainty, notes: link.notes },
  });
  return (
    <form className="grid gap-3 md:grid-cols-2" data-testid="edit-link-form" onSubmit={handleSubmit((body) => {
      setFormError(null);
      update.mutate({ id: link.id, body }, { onSuccess: onDone, onError: (err) => setFormError(applyServerErrors(err, setError, linkFieldNames)) });
    })}>
      <LinkFields register={register} errors={errors} />
      <div className="md:col-span-2"><FormError text={formError} /></div>
      <div className="flex gap-2 md:col-span-2">
        <Button type="submit" disabled={update.isPending}>Save changes</Button>
        <Button type="button" variant="quiet" onClick={onDone}>Cancel</Button>
      </div>
    </form>
  );
}
