import { useState } from 'react';
import { Link, useParams } from 'react-router';
import { useMe } from '../../api/account';
import { certificatePdfUrl, certificateSnapshotUrl, useCertificate, useCertificateSnapshot } from '../../api/certificates';
import { Button, Caution, EmptyState, Panel } from '../../components/ui';
import { describeError } from '../../lib/api-client';
import { fixed } from '../../lib/format';
import { CertificateActions } from './certificate-actions';
import { SnapshotTable } from './snapshot-table';
import { CertificateStateBadge, formatExpanded } from './certificate-state';

const groupHex = (hex: string) => hex.replace(/(.{8})(?=.)/g, '$1 ');

export function CertificatePage() {
  const { number = '' } = useParams();
  const me = useMe();
  const cert = useCertificate(number);
  const [showSnapshot, setShowSnapshot] = useState(false);
  const [raw, setRaw] = useState(false);
  const snapshot = useCertificateSnapshot(number, showSnapshot);
  if (cert.isPending) return <p className="text-ink-500">Loading…</p>;
  if (cert.isError) return <EmptyState title={`Certificate ${number} cannot be shown`}>{describeError(cert.error)}</EmptyState>;
  const c = cert.data;
  const role = me.data?.role;
  return (
    <>
      <header className="flex flex-wrap items-start justify-between gap-4">
        <div>
          <p className="text-sm text-ink-500"><Link to="/certificates">Certificates</Link> / {c.kind === 'chain' && c.chainId ? <>chain <Link to={`/chains/${c.chainId}`}>{c.campaignLabel}</Link></> : c.campaignLabel}</p>
          {c.kind === 'chain' && <p className="mt-1 inline-block rounded bg-ink-100 px-2 py-0.5 text-xs font-medium text-ink-700" data-testid="chain-certificate">Chain certificate: a transportable clock’s remote comparison with its side-by-side calibrations</p>}
          <h1 className="font-mono" data-testid="certificate-number">{c.number}</h1>
          <p className="mt-1 flex items-center gap-2 text-sm" data-testid="certificate-state"><CertificateStateBadge state={c.state} /> issued {c.issuedAt.replace('T', ' ').slice(0, 16)} UTC by {c.issuedBy.replace(/ <.*$/, '')}</p>
        </div>
        <div className="flex flex-wrap gap-2">
          <a href={certificatePdfUrl(c.number)} download={`${c.number}.pdf`} className="rounded-md bg-ink-700 px-3 py-1.5 text-sm font-medium text-paper-50 no-underline hover:bg-ink-600" data-testid="download-pdf">Download signed PDF</a>
          <a href={certificateSnapshotUrl(c.number)} download={`${c.number}.json`} className="rounded-md border border-ink-200 bg-white px-3 py-1.5 text-sm font-medium text-ink-700 no-underline hover:bg-ink-50">Snapshot (JSON)</a>
        </div>
      </header>

      {c.state === 'superseded' && (
        <div role="status" className="rounded-md border-l-4 border-brass-500 bg-paper-100 px-4 py-3 text-sm">
          Replaced by <Link to={`/certificates/${c.supersededByNumber}`} className="font-mono">{c.supersededByNumber}</Link> on {c.supersededAt?.slice(0, 10)}.
          {c.latestNumber && c.latestNumber !== c.supersededByNumber && <> The newest revision is <Link to={`/certificates/${c.latestNumber}`} className="font-mono">{c.latestNumber}</Link>.</>}
        </div>
      )}
      {c.state === 'revoked' && (
        <div role="status" className="rounded-md border-l-4 border-disagree-600 bg-disagree-100 px-4 py-3 text-sm text-disagree-800" data-testid="revocation">
          <strong>Withdrawn</strong> on {c.revokedAt?.replace('T', ' ').slice(0, 16)} UTC. Reason: {c.revocationReason}
        </div>
      )}

      <div className="grid gap-5 md:grid-cols-2">
        <Panel title="Result">
          <dl className="grid grid-cols-[minmax(0,15rem)_1fr] gap-x-4 gap-y-1.5 text-sm">
            <dt className="text-ink-500">Geopotential difference ΔC{c.chain ? ` = C(${c.chain.toSite}) − C(${c.chain.fromSite})` : ''}</dt><dd>{formatExpanded(c.deltaC_m2s2, 'm²/s²')}</dd>
            <dt className="text-ink-500">Normal-height difference ΔH</dt><dd>{formatExpanded(c.deltaH_m, 'm')}</dd>
            {c.kind === 'chain'
              ? <><dt className="text-ink-500">Eₙ of the before/after calibrations</dt><dd>{c.En === null ? 'one calibration: no before/after check' : `${fixed(c.En, 2)} ${c.agreed ? '(|Eₙ| ≤ 1: consistent)' : '(|Eₙ| > 1: not consistent)'}`}</dd></>
              : <><dt className="text-ink-500">Eₙ against the sites’ registered normal heights (geodesy)</dt><dd>{c.En === null ? '—' : fixed(c.En, 2)} {c.agreed ? '(|Eₙ| ≤ 1: agrees)' : '(|Eₙ| > 1: does not agree)'}</dd></>}
            <dt className="text-ink-500">{c.kind === 'chain' ? 'Campaigns span' : 'Measurement period'}</dt><dd>{c.measurementPeriod.start.slice(0, 10)} to {c.measurementPeriod.end.slice(0, 10)}</dd>
            {c.chain && <><dt className="text-ink-500">Campaigns</dt><dd><ul>{c.chain.campaigns.map((x) => <li key={x.id}>{x.role.replace(/-/g, ' ')}: <Link to={`/campaigns/${x.id}`}>{x.label}</Link></li>)}</ul></dd></>}
            <dt className="text-ink-500">{c.instituteA && c.instituteB && c.instituteA.id !== c.instituteB.id ? 'Institutes' : 'Institute'}</dt><dd>{[...new Set([c.instituteA?.name, c.instituteB?.name].filter(Boolean))].join(' and ')}</dd>
          </dl>
        </Panel>
        <Panel title="File and trail">
          <dl className="grid grid-cols-[max-content_1fr] gap-x-4 gap-y-1.5 text-sm">
            <dt className="text-ink-500">SHA-256 of the PDF</dt><dd className="break-all font-mono text-xs" data-testid="certificate-sha">{groupHex(c.pdfSha256)}</dd>
            <dt className="text-ink-500">Size</dt><dd>{(c.pdfBytes / 1024).toFixed(1)} KiB</dd>
            <dt className="text-ink-500">Audit-trail head at issue</dt><dd className="break-all font-mono text-xs">{groupHex(c.auditChainHead)}</dd>
          </dl>
          <p className="mt-3 text-sm">
            {role !== 'operator' && c.campaignId && <><Link to={`/audit/campaigns/${c.campaignId}`}>Audit trail of the campaign</Link> · </>}
            <Link to={`/verify?number=${encodeURIComponent(c.number)}&sha256=${c.pdfSha256}`}>Public check</Link>
          </p>
        </Panel>
      </div>

      <Panel title="Revisions">
        <ol className="space-y-1 text-sm">
          {c.revisions.map((r) => (
            <li key={r.number} className="flex items-center gap-3">
              {r.number === c.number ? <span className="font-mono font-semibold">{r.number}</span> : <Link to={`/certificates/${r.number}`} className="font-mono">{r.number}</Link>}
              <CertificateStateBadge state={r.state} />
              <span className="text-ink-500">{r.issuedAt.slice(0, 10)}</span>
            </li>
          ))}
        </ol>
        {role === 'coordinator' && c.state === 'valid' && <div className="mt-4"><CertificateActions number={c.number} /></div>}
      </Panel>

      <Panel title="Snapshot" actions={<Button variant="quiet" onClick={() => setShowSnapshot((s) => !s)} aria-expanded={showSnapshot}>{showSnapshot ? 'Hide' : 'Show'}</Button>}>
        <p className="text-sm text-ink-600">The frozen data the PDF was rendered from: every number with its uncertainty and unit, the budget, constants, software version and input-file hashes.</p>
        {showSnapshot && (
          <div className="mt-3 flex gap-1 text-xs" role="group" aria-label="Snapshot view">
            <Button variant={raw ? 'quiet' : 'primary'} onClick={() => setRaw(false)} aria-pressed={!raw}>Table</Button>
            <Button variant={raw ? 'primary' : 'quiet'} onClick={() => setRaw(true)} aria-pressed={raw}>Raw JSON</Button>
          </div>
        )}
        {showSnapshot && !snapshot.data && <p className="mt-3 text-sm text-ink-500">Loading…</p>}
        {showSnapshot && snapshot.data && !raw && ('timeSeries' in snapshot.data ? <SnapshotTable snapshot={snapshot.data} /> : <p className="mt-3 text-sm text-ink-600">A chain certificate’s snapshot: see the raw JSON.</p>)}
        {showSnapshot && snapshot.data && raw && (
          <pre className="mt-3 max-h-[28rem] overflow-auto rounded-md bg-ink-900 p-3 text-xs text-ink-50" data-testid="snapshot-json">
            {JSON.stringify('timeSeries' in snapshot.data ? { ...snapshot.data, timeSeries: `[${snapshot.data.timeSeries.length} points]` } : snapshot.data, null, 2)}
          </pre>
        )}
      </Panel>
      <Caution />
    </>
  );
}
