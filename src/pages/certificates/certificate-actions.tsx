import { useState } from 'react';
import { useNavigate } from 'react-router';
import type { ReviewException } from '../../../shared/campaigns';
import { Link } from 'react-router';
import { useQueryClient } from '@tanstack/react-query';
import { certificateKeys, useCertificateRequestProgress, useIssueCertificate, useReissueCertificate, useRevokeCertificate } from '../../api/certificates';
import { ConfirmDialog } from '../../components/confirm-dialog';
import { ProgressBar } from '../../components/progress-bar';
import { Button } from '../../components/ui';
import { describeError } from '../../lib/api-client';
import { notify } from '../../lib/notices';

// Coordinator actions on certificates, each behind a confirmation that says what will happen. The server checks
// the role, the states, the four-eyes rule and the justification when asked; a worker then renders, time-stamps and
// signs, and the dialog shows its progress until the certificate exists, then links to it.

/** The worker's progress on a request, then the certificate (or why there is none). */
export function RequestProgress({ progressUrl, onOpen }: { progressUrl: string; onOpen: () => void }) {
  const progress = useCertificateRequestProgress(progressUrl);
  const p = progress.data;
  if (!p) return <p className="text-sm text-ink-500">Request recorded; waiting for its progress…</p>;
  return (
    <div className="space-y-2 rounded-md border border-paper-200 bg-paper-50 p-3">
      <ProgressBar label={p.kind === 'reissue' ? 'Issuing the next revision' : 'Issuing the certificate'} progress={p} />
      {p.state === 'done' && p.certificateNumber && (
        <p className="text-sm" role="status">
          {p.created === false ? 'Nothing changed since it was issued: ' : 'Issued and signed: '}
          <Link className="font-medium text-ink-700 underline" to={`/certificates/${p.certificateNumber}`} onClick={onOpen}>certificate {p.certificateNumber}</Link>
        </p>
      )}
    </div>
  );
}

/** `exceptions` undefined: not known here (a list page), so the justification is offered in case the result needs one. */
export function IssueCertificateButton({ campaignId, exceptions, fourEyes = false, resultComputed = true }: { campaignId: string; exceptions?: ReviewException[]; fourEyes?: boolean; resultComputed?: boolean }) {
  const issue = useIssueCertificate();
  const navigate = useNavigate();
  const [open, setOpen] = useState(false);
  const justify = (exceptions?.length ?? 0) > 0;
  const unknown = exceptions === undefined || !resultComputed;
  const progress = useCertificateRequestProgress(issue.data?.progressUrl ?? null);
  const done = progress.data?.state === 'done';
  const qc = useQueryClient();
  const close = () => {
    setOpen(false);
    if (issue.data) void qc.invalidateQueries({ queryKey: certificateKeys.all });
  };
  return (
    <>
      <Button onClick={() => { issue.reset(); setOpen(true); }}>Issue certificate…</Button>
      {open && (
        <ConfirmDialog open title="Issue and sign the certificate?" confirmLabel={done ? 'Open the certificate' : 'Issue and sign'}
          consequences={[
            'A certificate number is assigned; the PDF is rendered from the campaign’s current result and signed with the institute’s key.',
            'The campaign becomes “certified”; both labs and the coordinating institute are mailed.',
            'Your comment (and justification) is printed on the certificate and kept in the audit trail.',
            ...(fourEyes ? ['Four-eyes rule: this is refused if you accepted the campaign yourself.'] : []),
            ...(exceptions ?? []).map((x) => <span key={x.code} className="font-medium text-disagree-800">Exception: {x.text}</span>),
          ]}
          fields={[
            { name: 'comment', label: 'Comment for the certificate', required: true, minLength: 5, rows: 3 },
            ...(justify ? [{ name: 'justification', label: 'Why certify despite the exceptions above?', required: true, minLength: 10, rows: 3 }] : []),
            ...(!justify && unknown ? [{ name: 'justification', label: 'Justification, in case the result calls for one', rows: 3,
              hint: 'Issuing checks the current result. If Eₙ does not agree or the uptime is low, a justification of at least 10 characters is required.' }] : []),
          ]}
          pending={issue.isPending || (issue.isSuccess && !done)} error={issue.isError ? describeError(issue.error) : null} onCancel={close}
          onConfirm={(v) => {
            if (done && progress.data?.certificateNumber) {
              close();
              void navigate(`/certificates/${progress.data.certificateNumber}`);
              return;
            }
            issue.mutate({ campaignId, comment: v.comment, justification: v.justification || undefined });
          }}>
          {issue.data && <RequestProgress progressUrl={issue.data.progressUrl} onOpen={close} />}
        </ConfirmDialog>
      )}
    </>
  );
}

export function CertificateActions({ number }: { number: string }) {
  const [open, setOpen] = useState<'reissue' | 'revoke' | null>(null);
  const navigate = useNavigate();
  const reissue = useReissueCertificate();
  const revoke = useRevokeCertificate();
  const mutation = open === 'revoke' ? revoke : reissue;
  const reissueProgress = useCertificateRequestProgress(reissue.data?.progressUrl ?? null);
  const reissued = reissueProgress.data?.state === 'done';
  const qc = useQueryClient();
  const close = () => {
    setOpen(null);
    if (reissue.data) void qc.invalidateQueries({ queryKey: certificateKeys.all });
  };
  const show = (kind: 'reissue' | 'revoke') => { reissue.reset(); revoke.reset(); setOpen(kind); };
  return (
    <div className="flex gap-2">
      <Button variant="quiet" onClick={() => show('reissue')}>Reissue…</Button>
      <Button variant="quiet" onClick={() => show('revoke')}>Withdraw…</Button>
      {open && (
        <ConfirmDialog key={open} open variant={open === 'revoke' ? 'danger' : 'primary'}
          title={open === 'reissue' ? `Issue the next revision of ${number}?` : `Withdraw ${number}?`}
          confirmLabel={open === 'reissue' ? (reissued ? 'Open the new revision' : 'Issue the next revision') : 'Withdraw the certificate'}
          consequences={open === 'reissue'
            ? ['The next revision is rendered from the campaign’s current result and signed.', `${number} is marked replaced; verifying it names the new revision.`, 'The participants are mailed what was corrected.']
            : [`${number} is marked withdrawn; anyone who verifies the file is told so, with your reason.`, 'This cannot be undone; a new certificate needs a new issue.', 'The participants are mailed the reason.']}
          fields={[open === 'reissue'
            ? { name: 'reason', label: 'What was corrected?', required: true, minLength: 3, rows: 3 }
            : { name: 'reason', label: 'Why is the certificate withdrawn?', required: true, minLength: 3, rows: 3 }]}
          pending={mutation.isPending || (open === 'reissue' && reissue.isSuccess && !reissued)} error={mutation.isError ? describeError(mutation.error) : null} onCancel={close}
          onConfirm={(v) => {
            if (open === 'reissue') {
              if (reissued && reissueProgress.data?.certificateNumber) {
                close();
                void navigate(`/certificates/${reissueProgress.data.certificateNumber}`);
              } else reissue.mutate({ number, reason: v.reason });
              return;
            }
            revoke.mutateAsync({ number, reason: v.reason }).then(() => {
              setOpen(null);
              notify({ kind: 'info', text: `${number} withdrawn; participants are notified.` });
            }, () => undefined);
          }}>
          {open === 'reissue' && reissue.data && <RequestProgress progressUrl={reissue.data.progressUrl} onOpen={close} />}
        </ConfirmDialog>
      )}
    </div>
  );
}
