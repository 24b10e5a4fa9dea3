import { zodResolver } from '@hookform/resolvers/zod';
import { createColumnHelper, flexRender, getCoreRowModel, useReactTable } from '@tanstack/react-table';
import { useMemo, useState } from 'react';
import { useForm } from 'react-hook-form';
import { columnMappingSchema, type RatioSeries, type UploadPreview } from '../../../shared/uploads';
import { useMe } from '../../api/account';
import { useCampaignUploads, usePreviewUpload, useSendUpload, useSeriesPlot, type UploadStage } from '../../api/uploads';
import { TimeSeriesPlot, type MjdRange } from '../../components/plots/time-series-plot';
import { Button, EmptyState, Field, inputClass, Panel } from '../../components/ui';
import { ApiError, describeError } from '../../lib/api-client';
import { plural } from '../../lib/format';

// Ratio-series uploads of one campaign: choose a file, check the preview and the column mapping, send it with
// progress (bytes sent, then rows the server has processed), list what is stored and plot one series.

type MappingForm = { epochColumn: string; epochKind: string; valueColumn: string; valueKind: string; flagColumn: string };

function columnLabel(p: UploadPreview, i: number) {
  return p.header?.[i] ? `${i + 1}: ${p.header[i]}` : `column ${i + 1}`;
}

function ProgressBar({ label, fraction, detail, testId, failed }: { label: string; fraction: number; detail: string; testId: string; failed?: boolean }) {
  const pct = Math.round(Math.max(0, Math.min(1, fraction)) * 100);
  return (
    <div className="text-sm" data-testid={testId}>
      <div className="mb-1 flex justify-between text-ink-700"><span>{label}</span><span>{pct} % · {detail}</span></div>
      <div className="h-2.5 w-full overflow-hidden rounded bg-paper-200" role="progressbar" aria-label={label} aria-valuemin={0} aria-valuemax={100} aria-valuenow={pct}>
        <div className={`h-full transition-[width] ${failed ? 'bg-disagree-600' : 'bg-ink-600'}`} style={{ width: `${pct}%` }} />
      </div>
    </div>
  );
}

/** The server's detail, then every listed issue once, then how many were not listed (furtherProblems). */
function UploadProblem({ error }: { error: unknown }) {
  if (!(error instanceof ApiError)) return <p>{describeError(error)}</p>;
  const issues = error.problem.issues ?? [];
  const further = typeof error.problem.furtherProblems === 'number' ? error.problem.furtherProblems : 0;
  return (
    <>
      <p>{error.problem.detail}</p>
      {issues.length > 1 && (
        <ul className="mt-2 list-disc space-y-0.5 pl-5 text-xs" data-testid="upload-issues">
          {issues.map((i, n) => <li key={n}>{i.line ? `Line ${i.line}${i.column ? `, column ${i.column}` : ''}` : i.path}: {i.message}</li>)}
          {further > 0 && <li className="list-none text-ink-600">… and {plural(further, 'more problem')} not listed.</li>}
        </ul>
      )}
      {error.problem.existingUploadId != null && <p className="mt-1">The earlier upload is listed below.</p>}
    </>
  );
}

function UploadForm({ campaignId }: { campaignId: string }) {
  const [file, setFile] = useState<File | null>(null);
  const [stage, setStage] = useState<UploadStage | null>(null);
  const [error, setError] = useState<unknown>(null);
  const [done, setDone] = useState<RatioSeries | null>(null);
  const [inputKey, setInputKey] = useState(0);
  const preview = usePreviewUpload(campaignId);
  const { send } = useSendUpload(campaignId);
  const form = useForm<MappingForm>({
    resolver: zodResolver(columnMappingSchema) as never,
    defaultValues: { epochColumn: '1', epochKind: 'mjd', valueColumn: '2', valueKind: 'ratio', flagColumn: '' },
  });
  const p = preview.data;

  async function choose(f: File | null) {
    setFile(f);
    setStage(null);
    setError(null);
    setDone(null);
    if (!f) return;
    const result = await preview.mutateAsync(f).catch((e) => {
      setError(e);
      return null;
    });
    if (result?.suggested) {
      const s = result.suggested;
      form.reset({ epochColumn: String(s.epochColumn), epochKind: s.epochKind, valueColumn: String(s.valueColumn), valueKind: s.valueKind, flagColumn: s.flagColumn ? String(s.flagColumn) : '' });
    }
  }

  const submit = form.handleSubmit(async (values) => {
    if (!file || !p) return;
    setError(null);
    setDone(null);
    const mapping: Record<string, string> = {
      epochColumn: String(values.epochColumn), epochKind: String(values.epochKind), valueColumn: String(values.valueColumn), valueKind: String(values.valueKind),
      delimiter: p.delimiter === '\t' ? 'tab' : p.delimiter, hasHeader: String(p.hasHeader),
    };
    if (values.flagColumn) mapping.flagColumn = String(values.flagColumn);
    try {
      const stored = await send(file, mapping, setStage);
      // Ready for the next file: the chosen file and its preview go; the finished bars and the confirmation stay.
      setDone(stored);
      setFile(null);
      preview.reset();
      setInputKey((k) => k + 1);
    } catch (e) {
      setError(e);
    }
  });

  const columns = p ? Array.from({ length: p.columnCount }, (_, i) => i) : [];
  const busy = stage !== null && stage.stage !== 'done' && stage.stage !== 'failed' && !error;
  return (
    <div className="space-y-4">
      <Field label="Series file (CSV: epoch, ratio or offset, optional flag)" hint="Comma, semicolon or tab; # comment lines; MJD or ISO 8601 UTC epochs.">
        <input key={inputKey} type="file" accept=".csv,.txt,.tsv,text/csv,text/plain" className={inputClass} aria-label="Series file" disabled={busy}
          onChange={(e) => void choose(e.target.files?.[0] ?? null)} />
      </Field>
      {preview.isPending && <p className="text-sm text-ink-500">Reading the start of the file…</p>}
      {p && file && (
        <>
          <div className="text-sm text-ink-600" data-testid="preview-summary">
            Delimiter <strong>{p.delimiter === '\t' ? 'tab' : p.delimiter}</strong> · {p.hasHeader ? 'header line found' : 'no header line'} · {p.columnCount} columns
            {p.notes.map((n) => <span key={n} className="block text-xs text-ink-400">{n}</span>)}
          </div>
          <div className="overflow-x-auto rounded-md border border-paper-200">
            <table className="min-w-full text-xs" aria-label="Preview of the first rows">
              <thead className="bg-paper-100 text-left text-ink-600">
                <tr><th className="px-2 py-1 font-medium">line</th>{columns.map((i) => <th key={i} className="px-2 py-1 font-medium">{columnLabel(p, i)}</th>)}</tr>
              </thead>
              <tbody>
                {p.rows.map((r) => (
                  <tr key={r.line} className="border-t border-paper-200 font-mono">
                    <td className="px-2 py-0.5 text-ink-400">{r.line}</td>
                    {columns.map((i) => <td key={i} className="px-2 py-0.5">{r.cells[i] ?? ''}</td>)}
                  </tr>
                ))}
              </tbody>
            </table>
          </div>
          <form onSubmit={(e) => void submit(e)} className="grid grid-cols-1 gap-3 sm:grid-cols-5">
            <Field label="Epoch column" error={form.formState.errors.epochColumn?.message}>
              <select className={inputClass} {...form.register('epochColumn')}>{columns.map((i) => <option key={i} value={i + 1}>{columnLabel(p, i)}</option>)}</select>
            </Field>
            <Field label="Epoch written as" error={form.formState.errors.epochKind?.message}>
              <select className={inputClass} {...form.register('epochKind')}><option value="mjd">MJD (days)</option><option value="iso">ISO 8601 UTC</option></select>
            </Field>
            <Field label="Value column" error={form.formState.errors.valueColumn?.message}>
              <select className={inputClass} {...form.register('valueColumn')}>{columns.map((i) => <option key={i} value={i + 1}>{columnLabel(p, i)}</option>)}</select>
            </Field>
            <Field label="Value is" error={form.formState.errors.valueKind?.message}>
              <select className={inputClass} {...form.register('valueKind')}><option value="ratio">frequency ratio</option><option value="offset">fractional offset y</option></select>
            </Field>
            <Field label="Flag column" error={form.formState.errors.flagColumn?.message}>
              <select className={inputClass} {...form.register('flagColumn')}><option value="">none (all valid)</option>{columns.map((i) => <option key={i} value={i + 1}>{columnLabel(p, i)}</option>)}</select>
            </Field>
            <div className="sm:col-span-5"><Button type="submit" disabled={busy || !file}>Upload {file?.name}</Button></div>
          </form>
        </>
      )}
      {stage && (
        <div className="space-y-2" data-testid="upload-progress">
          <ProgressBar testId="progress-sent" label="Sent to the server" fraction={stage.sentFraction} detail={`${(stage.sentFraction * stage.bytesTotal / 1e6).toFixed(1)} of ${(stage.bytesTotal / 1e6).toFixed(1)} MB`} />
          {stage.stage === 'failed' ? (
            <ProgressBar testId="progress-processed" failed label={stage.checkedWhole ? 'Checked by the server: nothing stored' : 'Stopped: nothing stored'}
              fraction={stage.checkedWhole ? 1 : stage.bytesRead / Math.max(1, stage.bytesTotal)}
              detail={stage.checkedWhole ? 'whole file checked · nothing stored' : 'nothing stored'} />
          ) : (
            <ProgressBar testId="progress-processed" label="Checked and stored by the server" fraction={stage.stage === 'done' ? 1 : stage.bytesRead / Math.max(1, stage.bytesTotal)}
              detail={`${stage.rowsProcessed.toLocaleString('en')} rows${stage.stage === 'storing' ? ' · keeping the raw file' : stage.stage === 'done' ? ' · done' : ''}`} />
          )}
        </div>
      )}
      {done && <p className="text-sm text-agree-700" role="status">Stored {done.rowCount.toLocaleString('en')} rows ({done.validCount.toLocaleString('en')} valid) from {done.fileName}.</p>}
      {error !== null && (
        <div className="rounded-md border border-disagree-600 bg-white p-3 text-sm text-disagree-800" role="alert" data-testid="upload-error">
          <UploadProblem error={error} />
        </div>
      )}
    </div>
  );
}

const days = (s: RatioSeries) => s.lastMjd - s.firstMjd;
function span(s: RatioSeries) {
  const d = days(s);
  return d >= 1 ? `${d.toFixed(2)} d` : `${(d * 24).toFixed(2)} h`;
}
const col = createColumnHelper<RatioSeries>();

export function CampaignUploadsPanel({ campaignId, campaignState, canUpload }: { campaignId: string; campaignState: string; canUpload?: boolean }) {
  const me = useMe();
  const uploads = useCampaignUploads(campaignId);
  const [selected, setSelected] = useState<string | null>(null);
  const [timeAxis, setTimeAxis] = useState<'mjd' | 'utc'>('mjd');
  const mayUpload = (canUpload ?? me.data?.role === 'operator') && (campaignState === 'draft' || campaignState === 'returned');
  const rows = useMemo(() => uploads.data ?? [], [uploads.data]);
  const current = selected ?? rows[rows.length - 1]?.id ?? null;
  const [zoom, setZoom] = useState<{ seriesId: string; range: MjdRange } | null>(null);
  const range = zoom && zoom.seriesId === current ? zoom.range : null;
  const plot = useSeriesPlot(current, 1200, range);
  const columns = useMemo(() => [
    col.accessor('fileName', { header: 'File', cell: (c) => <span className="font-medium">{c.getValue()}{c.row.original.invented ? ' (invented)' : ''}</span> }),
    col.accessor('sha256', { header: 'SHA-256', cell: (c) => <code title={c.getValue()}>{c.getValue().slice(0, 12)}…</code> }),
    col.accessor('rowCount', { header: 'Rows', cell: (c) => c.getValue().toLocaleString('en') }),
    col.accessor('validCount', { header: 'Valid', cell: (c) => c.getValue().toLocaleString('en') }),
    col.display({ id: 'span', header: 'Span', cell: (c) => `${span(c.row.original)} from MJD ${c.row.original.firstMjd.toFixed(4)}` }),
    col.accessor('tau0Seconds', { header: 'τ₀', cell: (c) => `${c.getValue()} s` }),
    col.accessor('uptimeFraction', { header: 'Uptime', cell: (c) => `${(c.getValue() * 100).toFixed(1)} %` }),
  ], []);
  const table = useReactTable({ data: rows, columns, getCoreRowModel: getCoreRowModel(), getRowId: (r) => r.id });
  const shown = rows.find((r) => r.id === current);
  return (
    <Panel title="Ratio series">
      <div className="space-y-5">
        {mayUpload && <UploadForm campaignId={campaignId} />}
        {!mayUpload && <p className="text-sm text-ink-500">Series are added by lab staff of the owning institute while the campaign is a draft or returned.</p>}
        {uploads.isError && <p className="text-sm text-disagree-600">{describeError(uploads.error)}</p>}
        {rows.length === 0 && uploads.isSuccess && <EmptyState title="No series uploaded yet" />}
        {rows.length > 0 && (
          <div className="overflow-x-auto rounded-md border border-paper-200">
            <table className="min-w-full text-sm" aria-label="Uploaded series">
              <thead className="bg-paper-100 text-left text-ink-600">
                {table.getHeaderGroups().map((hg) => (
                  <tr key={hg.id}>{hg.headers.map((h) => <th key={h.id} className="px-3 py-2 font-medium">{flexRender(h.column.columnDef.header, h.getContext())}</th>)}</tr>
                ))}
              </thead>
              <tbody>
                {table.getRowModel().rows.map((r) => (
                  <tr key={r.id} className={`cursor-pointer border-t border-paper-200 hover:bg-paper-50 ${r.id === current ? 'bg-paper-100' : ''}`}
                    onClick={() => setSelected(r.id)} onKeyDown={(e) => e.key === 'Enter' && setSelected(r.id)} tabIndex={0} aria-selected={r.id === current}>
                    {r.getVisibleCells().map((c) => <td key={c.id} className="px-3 py-2">{flexRender(c.column.columnDef.cell, c.getContext())}</td>)}
                  </tr>
                ))}
              </tbody>
            </table>
          </div>
        )}
        {shown && (
          <div>
            <div className="mb-2 flex items-center gap-3 text-sm">
              <span className="font-medium text-ink-700">{shown.fileName}</span>
              <label className="inline-flex items-center gap-1">Time axis
                <select className={`${inputClass} w-auto`} value={timeAxis} onChange={(e) => setTimeAxis(e.target.value as 'mjd' | 'utc')} aria-label="Time axis">
                  <option value="mjd">MJD</option><option value="utc">UTC</option>
                </select>
              </label>
            </div>
            {plot.isPending && <p className="text-sm text-ink-500">Loading plot data…</p>}
            {plot.data && (
              <TimeSeriesPlot buckets={plot.data.buckets} range={plot.data} full={{ fromMjd: plot.data.firstMjd, toMjd: plot.data.lastMjd }} loading={plot.isFetching}
                onRangeChange={(r) => setZoom(r && current ? { seriesId: current, range: r } : null)} timeAxis={timeAxis} title={`Fractional frequency offset of ${shown.fileName}`} />
            )}
          </div>
        )}
      </div>
    </Panel>
  );
}
