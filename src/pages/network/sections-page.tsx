import { zodResolver } from '@hookform/resolvers/zod';
import { createColumnHelper } from '@tanstack/react-table';
import { useState } from 'react';
import { useForm } from 'react-hook-form';
import { z } from 'zod';
import { sectionInputSchema, type Section, type SectionInput, type SectionUploadResult } from '../../../shared/network';
import { useMe } from '../../api/account';
import { useDeleteSection, useSaveSection, useSections, useUploadSections } from '../../api/network';
import { DataTable, type TableState } from '../../components/data-table';
import { Button, Field, inputClass, Panel } from '../../components/ui';
import { ApiError, describeError } from '../../lib/api-client';
import { notify } from '../../lib/notices';
import { fmt } from './format';
import { NetworkNav } from './network-nav';

const col = createColumnHelper<Section>();

export function SectionsPage() {
  const me = useMe();
  const canWrite = me.data?.role === 'coordinator';
  const [state, setState] = useState<TableState>({ page: 1, pageSize: 15, sort: 'lineName', order: 'asc', q: '' });
  const sections = useSections(state);
  const [editing, setEditing] = useState<Section | null>(null);
  const remove = useDeleteSection();
  const columns = [
    col.accessor('lineName', { header: 'Line', cell: (c) => c.getValue() ?? '—' }),
    col.accessor('fromCode', { header: 'From', cell: (c) => <span className="whitespace-nowrap">{c.getValue()}</span> }),
    col.accessor('toCode', { header: 'To', cell: (c) => <span className="whitespace-nowrap">{c.getValue()}</span> }),
    col.accessor('deltaHeightM', { header: 'Δn (m)', cell: (c) => fmt(c.getValue(), 5) }),
    col.accessor('lengthKm', { header: 'Length (km)', cell: (c) => fmt(c.getValue(), 2) }),
    col.accessor('meanGravity_ms2', {
      header: 'Mean gravity (m/s²)',
      cell: (c) => <span>{fmt(c.getValue(), 6)}{c.row.original.gravityFromNormal && <span className="ml-1 text-xs text-brass-600" title="no measured gravity: normal gravity at the mid-latitude">(from normal gravity)</span>}</span>,
    }),
    col.accessor('deltaC_m2s2', { header: 'ΔC (m²/s²)', enableSorting: false, cell: (c) => fmt(c.getValue(), 4) }),
    col.accessor('runCheckPassed', {
      header: 'Forward/backward', enableSorting: false,
      cell: (c) => (c.getValue() === null ? '—' : c.getValue()
        ? <span className="text-agree-800">✓ {fmt(c.row.original.runDifferenceMm, 1)} mm</span>
        : <span className="font-semibold text-disagree-600">✕ {fmt(c.row.original.runDifferenceMm, 1)} mm &gt; {fmt(c.row.original.runToleranceMm, 1)} mm</span>),
    }),
    col.accessor('observedOn', { header: 'Observed', cell: (c) => c.getValue() ?? '—' }),
    ...(canWrite ? [col.display({
      id: 'actions', header: '',
      cell: (c) => (
        <span className="flex gap-1">
          <Button variant="quiet" onClick={() => setEditing(c.row.original)}>Edit</Button>
          <Button variant="quiet" onClick={() => { if (confirm('Remove this section?')) remove.mutate(c.row.original.id, { onError: (e) => notify({ kind: 'error', text: describeError(e) }) }); }}>Remove</Button>
        </span>
      ),
    })] : []),
  ];
  return (
    <>
      <h1>Levelling sections</h1>
      <NetworkNav />
      {canWrite && <UploadPanel />}
      <Panel title="Sections">
        <p className="mb-2 text-xs text-ink-500">ΔC = ḡ·Δn. The return run is measured to → from, so forward + backward should vanish within the datum's tolerance k·√L.</p>
        <DataTable columns={columns as never} rows={sections.data?.items ?? []} total={sections.data?.total ?? 0} state={state} onState={setState}
          loading={sections.isFetching} filterLabel="Filter by line or benchmark" />
        {canWrite && <SectionForm key={editing?.id ?? 'new'} editing={editing} onDone={() => setEditing(null)} />}
      </Panel>
    </>
  );
}

type SectionFormValues = z.input<typeof sectionInputSchema>;

function SectionForm({ editing, onDone }: { editing: Section | null; onDone: () => void }) {
  const save = useSaveSection();
  const { register, handleSubmit, setError, formState: { errors } } = useForm<SectionFormValues, unknown, SectionInput>({
    resolver: zodResolver(sectionInputSchema),
    defaultValues: editing ? {
      lineName: editing.lineName, fromCode: editing.fromCode, toCode: editing.toCode, deltaHeightM: editing.deltaHeightM, lengthKm: editing.lengthKm,
      meanGravity_ms2: editing.gravityFromNormal ? null : editing.meanGravity_ms2, observedOn: editing.observedOn, forwardM: editing.forwardM, backwardM: editing.backwardM,
    } : {},
  });
  const num = { setValueAs: (v: unknown) => (v === '' || v === null || v === undefined ? null : Number(v)) };
  return (
    <details className="mt-4" open={!!editing}>
      <summary className="cursor-pointer text-sm font-medium">{editing ? `Correct section ${editing.fromCode} → ${editing.toCode}` : 'Add a section'}</summary>
      <form className="mt-3 grid gap-3 md:grid-cols-4" onSubmit={handleSubmit((body) => save.mutate({ id: editing?.id, body }, {
        onSuccess: () => { notify({ kind: 'info', text: 'Section saved.' }); onDone(); },
        onError: (e) => {
          if (e instanceof ApiError) for (const i of e.problem.issues ?? []) setError(i.path.replace(/^body\./, '') as keyof SectionFormValues, { message: i.message });
          notify({ kind: 'error', text: describeError(e) });
        },
      }))}>
        <Field label="Line" error={errors.lineName?.message}><input className={inputClass} {...register('lineName')} /></Field>
        <Field label="From benchmark" error={errors.fromCode?.message}><input className={inputClass} {...register('fromCode')} /></Field>
        <Field label="To benchmark" error={errors.toCode?.message}><input className={inputClass} {...register('toCode')} /></Field>
        <Field label="Δn (m)" error={errors.deltaHeightM?.message}><input className={inputClass} {...register('deltaHeightM', { valueAsNumber: true })} /></Field>
        <Field label="Length (km)" error={errors.lengthKm?.message}><input className={inputClass} {...register('lengthKm', { valueAsNumber: true })} /></Field>
        <Field label="Mean gravity (m/s²)" hint="empty: normal gravity" error={errors.meanGravity_ms2?.message}><input className={inputClass} {...register('meanGravity_ms2', num)} /></Field>
        <Field label="Observed on" error={errors.observedOn?.message}><input className={inputClass} placeholder="YYYY-MM-DD" {...register('observedOn', { setValueAs: (v) => v || null })} /></Field>
        <Field label="Forward run (m)" error={errors.forwardM?.message}><input className={inputClass} {...register('forwardM', num)} /></Field>
        <Field label="Backward run (m)" error={errors.backwardM?.message}><input className={inputClass} {...register('backwardM', num)} /></Field>
        <div className="flex items-end gap-2"><Button type="submit" disabled={save.isPending}>Save section</Button>{editing && <Button variant="quiet" type="button" onClick={onDone}>Cancel</Button>}</div>
      </form>
    </details>
  );
}

function UploadPanel() {
  const upload = useUploadSections();
  const [file, setFile] = useState<File | null>(null);
  const [preview, setPreview] = useState<SectionUploadResult | null>(null);
  const [error, setError] = useState<string | null>(null);
  const run = (asPreview: boolean) => {
    if (!file) return;
    setError(null);
    upload.mutate({ file, preview: asPreview }, {
      onSuccess: (r) => {
        setPreview(r.stored ? null : r);
        if (r.stored) {
          notify({ kind: 'info', text: `${r.rowCount} sections stored.` });
          setFile(null);
        }
      },
      onError: (e) => { setPreview(null); setError(describeError(e)); },
    });
  };
  return (
    <Panel title="Upload sections (CSV)">
      <p className="mb-2 text-sm text-ink-600">
        Columns: <code>line, from, to, delta_h_m, length_km, mean_gravity_ms2, observed_on, forward_m, backward_m</code> (see docs/formats/levelling-sections.md).
        The whole file is checked first; a bad line stores nothing.
      </p>
      <div className="flex flex-wrap items-center gap-2">
        <input aria-label="Sections file" type="file" accept=".csv,text/csv" onChange={(e) => { setFile(e.target.files?.[0] ?? null); setPreview(null); setError(null); }} />
        <Button variant="quiet" disabled={!file || upload.isPending} onClick={() => run(true)}>Check and preview</Button>
        <Button disabled={!file || !preview || upload.isPending} onClick={() => run(false)}>Store {preview ? `${preview.rowCount} sections` : ''}</Button>
      </div>
      {error && <p role="alert" className="mt-3 rounded-md bg-disagree-100 px-3 py-2 text-sm text-disagree-800">{error}</p>}
      {preview && (
        <div className="mt-3 text-sm">
          <p>{preview.rowCount} sections read, nothing stored yet. SHA-256 <code className="text-xs">{preview.sha256.slice(0, 16)}…</code></p>
          {preview.warnings.map((w) => <p key={w.line} className="text-disagree-600">⚠ line {w.line}: {w.message}</p>)}
          <table className="mt-2 min-w-full text-xs">
            <thead><tr className="text-left text-ink-600"><th>line</th><th>from</th><th>to</th><th>Δn (m)</th><th>L (km)</th><th>ḡ (m/s²)</th><th>forward/backward</th></tr></thead>
            <tbody>
              {preview.rows.slice(0, 20).map((r) => (
                <tr key={r.line} className="border-t border-paper-200">
                  <td>{r.line}</td><td>{r.fromCode}</td><td>{r.toCode}</td><td>{fmt(r.deltaHeightM, 5)}</td><td>{fmt(r.lengthKm, 2)}</td>
                  <td>{fmt(r.meanGravity_ms2 ?? null, 6)}{r.gravityFromNormal ? ' (from normal gravity)' : ''}</td>
                  <td>{r.runCheckPassed === null ? '—' : r.runCheckPassed ? '✓ within tolerance' : '✕ over tolerance'}</td>
                </tr>
              ))}
            </tbody>
          </table>
        </div>
      )}
    </Panel>
  );
}
