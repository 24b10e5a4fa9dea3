import { createColumnHelper } from '@tanstack/react-table';
import { useState } from 'react';
import { Link } from 'react-router';
import { certificateStateLabels, certificateStates, type CertificateState, type CertificateSummary } from '../../../shared/certificate-registry';
import { useInstitutes, useMe } from '../../api/account';
import { useCampaignsAwaitingCertificate, useCertificates } from '../../api/certificates';
import { DataTable, type TableState } from '../../components/data-table';
import { Caution, Field, inputClass, Panel } from '../../components/ui';
import { IssueCertificateButton } from './certificate-actions';
import { CertificateStateBadge } from './certificate-state';

const col = createColumnHelper<CertificateSummary>();
const columns = [
  col.accessor('number', { header: 'Number', cell: (c) => <Link to={`/certificates/${c.getValue()}`} className="font-mono">{c.getValue()}</Link> }),
  col.accessor('campaignLabel', {
    header: 'Campaign or chain',
    cell: (c) => (c.row.original.kind === 'chain'
      ? <span><span className="mr-1 rounded bg-ink-100 px-1.5 py-0.5 text-xs font-medium text-ink-700">chain</span>{c.row.original.chainId ? <Link to={`/chains/${c.row.original.chainId}`}>{c.getValue()}</Link> : c.getValue()}</span>
      : c.getValue()),
  }),
  col.accessor((r) => [r.instituteA?.code, r.instituteB?.code].filter(Boolean).join(' – '), { id: 'institutes', header: 'Institutes', enableSorting: false }),
  col.accessor('state', {
    header: 'State',
    cell: (c) => (
      <span className="space-y-0.5">
        <CertificateStateBadge state={c.getValue()} />
        {c.row.original.supersededByNumber && <span className="block text-xs text-ink-500">by {c.row.original.supersededByNumber}</span>}
      </span>
    ),
  }),
  col.accessor('issuedAt', { header: 'Issued (UTC)', cell: (c) => c.getValue().replace('T', ' ').slice(0, 16) }),
  col.accessor('issuedBy', { header: 'Issued by', enableSorting: false, cell: (c) => c.getValue().replace(/ <.*$/, '') }),
];

/** The coordinator's queue: accepted campaigns that have no certificate yet. */
function AwaitingPanel() {
  const awaiting = useCampaignsAwaitingCertificate(true);
  const items = awaiting.data?.items ?? [];
  return (
    <Panel title="Accepted campaigns waiting for a certificate">
      {items.length === 0 ? (
        <p className="text-sm text-ink-500">{awaiting.isPending ? 'Loading…' : 'None: every accepted campaign is certified.'}</p>
      ) : (
        <ul className="divide-y divide-paper-200 text-sm" data-testid="awaiting-certificate">
          {items.map((c) => (
            <li key={c.id} className="flex flex-wrap items-center justify-between gap-3 py-2">
              <span>
                <Link to={`/audit/campaigns/${c.id}`} className="font-medium">{c.name}</Link>
                <span className="block text-xs text-ink-500">{c.clockA.name} ({c.clockA.institute.code}) – {c.clockB.name} ({c.clockB.institute.code}) · {c.periodStart.slice(0, 10)} to {c.periodEnd.slice(0, 10)}</span>
              </span>
              <IssueCertificateButton campaignId={c.id} />
            </li>
          ))}
        </ul>
      )}
    </Panel>
  );
}

export function CertificatesPage() {
  const me = useMe();
  const institutes = useInstitutes();
  const [table, setTable] = useState<TableState>({ page: 1, pageSize: 20, sort: 'issuedAt', order: 'desc', q: '' });
  const [state, setState] = useState<CertificateState | ''>('');
  const [kind, setKind] = useState<'campaign' | 'chain' | ''>('');
  const [instituteId, setInstituteId] = useState('');
  const [issuedFrom, setIssuedFrom] = useState('');
  const [issuedTo, setIssuedTo] = useState('');
  const list = useCertificates({
    page: table.page, pageSize: table.pageSize, sort: table.sort as never, order: table.order, q: table.q || undefined,
    state: state || undefined, kind: kind || undefined, instituteId: instituteId || undefined, issuedFrom: issuedFrom || undefined, issuedTo: issuedTo || undefined,
  });
  const reset = <T,>(set: (v: T) => void) => (v: T) => { set(v); setTable((t) => ({ ...t, page: 1 })); };
  return (
    <>
      <header>
        <h1>Certificates</h1>
        <p className="text-sm text-ink-500">Every certificate issued by the coordinating institute, with its revisions and withdrawals. Nothing is ever deleted.</p>
      </header>
      {me.data?.role === 'coordinator' && <AwaitingPanel />}
      <Panel>
        <div className="mb-4 grid gap-3 md:grid-cols-5">
          <Field label="Kind">
            <select className={inputClass} value={kind} onChange={(e) => reset(setKind)(e.target.value as 'campaign' | 'chain' | '')} aria-label="Kind">
              <option value="">any</option>
              <option value="campaign">campaign</option>
              <option value="chain">calibration chain</option>
            </select>
          </Field>
          <Field label="State">
            <select className={inputClass} value={state} onChange={(e) => reset(setState)(e.target.value as CertificateState | '')} aria-label="State">
              <option value="">any</option>
              {certificateStates.map((s) => <option key={s} value={s}>{certificateStateLabels[s]}</option>)}
            </select>
          </Field>
          <Field label="Institute">
            <select className={inputClass} value={instituteId} onChange={(e) => reset(setInstituteId)(e.target.value)} aria-label="Institute">
              <option value="">any</option>
              {institutes.data?.filter((i) => i.kind === 'laboratory').map((i) => <option key={i.id} value={i.id}>{i.code} · {i.name}</option>)}
            </select>
          </Field>
          <Field label="Issued from (YYYY-MM-DD)"><IsoDateInput value={issuedFrom} onChange={reset(setIssuedFrom)} /></Field>
          <Field label="Issued to (YYYY-MM-DD)"><IsoDateInput value={issuedTo} onChange={reset(setIssuedTo)} /></Field>
        </div>
        <DataTable columns={columns as never} rows={list.data?.items ?? []} total={list.data?.total ?? 0} state={table} onState={setTable}
          loading={list.isFetching} filterLabel="Filter by number, campaign or chain, or SHA-256" />
      </Panel>
      <p className="text-sm text-ink-600">Someone sent you a certificate file? <Link to="/verify">Check it on the public verification page</Link>.</p>
      <Caution />
    </>
  );
}

/** A date typed as ISO 8601 (YYYY-MM-DD), whatever the browser's locale; applied once complete and valid, or empty. */
function IsoDateInput({ value, onChange }: { value: string; onChange: (v: string) => void }) {
  const [text, setText] = useState(value);
  const valid = text === '' || (/^\d{4}-\d{2}-\d{2}$/.test(text) && !Number.isNaN(Date.parse(`${text}T00:00:00Z`)));
  return (
    <input className={inputClass} value={text} placeholder="YYYY-MM-DD" inputMode="numeric" aria-invalid={!valid}
      onChange={(e) => {
        const v = e.target.value.trim();
        setText(v);
        if (v === '' || (/^\d{4}-\d{2}-\d{2}$/.test(v) && !Number.isNaN(Date.parse(`${v}T00:00:00Z`)))) onChange(v);
      }} />
  );
}
