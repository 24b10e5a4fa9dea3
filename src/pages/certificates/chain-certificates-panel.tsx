import { useState } from 'react';
import { Link, useNavigate } from 'react-router';
import { useQueryClient } from '@tanstack/react-query';
import { useMe } from '../../api/account';
import { certificateKeys, certificatePdfUrl, useCertificateRequestProgress, useChainCertificates, useIssueChainCertificate } from '../../api/certificates';
import { ConfirmDialog } from '../../components/confirm-dialog';
import { Button, Panel } from '../../components/ui';
import { describeError } from '../../lib/api-client';
import { RequestProgress } from './certificate-actions';
import { CertificateStateBadge } from './certificate-state';

// The certificates of one calibration chain, with the coordinator's Certify action once every campaign of the chain
// is accepted or certified. The server checks the role, the campaigns' states, the four-eyes rule and the
// justification; a worker renders, time-stamps and signs, and the dialog shows its progress, then links to it.

function CertifyChainButton({ chainId, needsJustification }: { chainId: string; needsJustification: boolean }) {
  const issue = useIssueChainCertificate();
  const navigate = useNavigate();
  const [open, setOpen] = useState(false);
  const progress = useCertificateRequestProgress(issue.data?.progressUrl ?? null);
  const done = progress.data?.state === 'done';
  const qc = useQueryClient();
  const close = () => {
    setOpen(false);
    if (issue.data) void qc.invalidateQueries({ queryKey: certificateKeys.all });
  };
  return (
    <>
      <Button onClick={() => { issue.reset(); setOpen(true); }} data-testid="certify-chain">Certify chain…</Button>
      {open && (
        <ConfirmDialog open title="Issue and sign the chain certificate?" confirmLabel={done ? 'Open the certificate' : 'Issue and sign'}
          consequences={[
            'A certificate number is assigned; the PDF is rendered from the chain’s result (its campaigns’ current results) and signed with the institute’s key.',
            'It states ΔC and ΔH with U, k and p, the campaigns, the deployments of the transportable clock, why its systematic offset cancels, the transport term and the chain budget.',
            'The labs of every clock of the chain and the coordinating institute are mailed; your comment is printed on the certificate and kept in the audit trail.',
            'Four-eyes rule: refused if you accepted one of the chain’s campaigns yourself.',
          ]}
          fields={[
            { name: 'comment', label: 'Comment for the certificate', required: true, minLength: 5, rows: 3 },
            needsJustification
              ? { name: 'justification', label: 'Why certify although the before/after calibrations disagree?', required: true, minLength: 10, rows: 3 }
              : { name: 'justification', label: 'Justification, in case the chain calls for one', rows: 2 },
          ]}
          pending={issue.isPending || (issue.isSuccess && !done)} error={issue.isError ? describeError(issue.error) : null} onCancel={close}
          onConfirm={(v) => {
            if (done && progress.data?.certificateNumber) {
              close();
              void navigate(`/certificates/${progress.data.certificateNumber}`);
              return;
            }
            issue.mutate({ chainId, comment: v.comment, justification: v.justification || undefined });
          }}>
          {issue.data && <RequestProgress progressUrl={issue.data.progressUrl} onOpen={close} />}
        </ConfirmDialog>
      )}
    </>
  );
}

export function ChainCertificatesPanel({ chainId, chainAccepted, needsJustification }: { chainId: string; chainAccepted: boolean; needsJustification: boolean }) {
  const me = useMe();
  const list = useChainCertificates(chainId);
  const items = list.data?.items ?? [];
  const hasValid = items.some((c) => c.state === 'valid');
  const canIssue = me.data?.role === 'coordinator' && !hasValid && chainAccepted;
  return (
    <Panel title="Chain certificates" actions={canIssue ? <CertifyChainButton chainId={chainId} needsJustification={needsJustification} /> : undefined}>
      {!chainAccepted && <p className="text-sm text-ink-500">A certificate can be issued once every campaign of the chain is accepted or certified.</p>}
      {items.length === 0 ? (
        <p className="text-sm text-ink-500">{list.isPending ? 'Loading…' : 'No certificate has been issued for this chain.'}</p>
      ) : (
        <ul className="divide-y divide-paper-200 text-sm" data-testid="chain-certificates">
          {items.map((c) => (
            <li key={c.id} className="flex flex-wrap items-center gap-3 py-2">
              <Link to={`/certificates/${c.number}`} className="font-mono">{c.number}</Link>
              <CertificateStateBadge state={c.state} />
              <span className="text-ink-500">issued {c.issuedAt.slice(0, 10)}</span>
              <a href={certificatePdfUrl(c.number)} download={`${c.number}.pdf`} data-testid="chain-certificate-pdf">signed PDF</a>
              {c.revocationReason && <span className="text-xs text-disagree-800">reason: {c.revocationReason}</span>}
            </li>
          ))}
        </ul>
      )}
    </Panel>
  );
}
