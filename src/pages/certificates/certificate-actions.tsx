import { useState } from 'react';
import { useNavigate } from 'react-router';
import type { ReviewException } from '../../../shared/campaigns';
import { useIssueCertificate, useReissueCertificate, useRevokeCertificate } from '../../api/certificates';
import { ConfirmDialog } from '../../components/confirm-dialog';
import { Button } from '../../components/ui';
import { describeError } from '../../lib/api-client';
import { notify } from '../../lib/notices';

// Coordinator actions on certificates, each behind a confirmation that says what will happen. The server checks
// the role, the states, the four-eyes rule and the justification again.

/** `exceptions` undefined: not known here (a list page), so the justification is offered in case the result needs one. */
export function IssueCertificateButton({ campaignId, exceptions, fourEyes = false, resultComputed = true }: { campaignId: string; exceptions?: ReviewException[]; fourEyes?: boolean; resultComputed?: boolean }) {
  const issue = useIssueCertificate();
  const navigate = useNavigate();
  const [open, setOpen] = useState(false);
  const justify = (exceptions?.length ?? 0) > 0;
  const unknown = exceptions === undefined || !resultComputed;
  return (
    <>
      <Button onClick={() => { issue.reset(); setOpen(true); }}>Issue certificate…</Button>
      {open && (
        <ConfirmDialog open title="Issue and sign the certificate?" confirmLabel={issue.isPending ? 'Rendering and signing…' : 'Issue and sign'}
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
          pending={issue.isPending} error={issue.isError ? describeError(issue.error) : null} onCancel={() => setOpen(false)}
          onConfirm={(v) => {
            // mutateAsync: the button unmounts once the list shows the new certificate, and we still navigate.
            issue.mutateAsync({ campaignId, comment: v.comment, justification: v.justification || undefined }).then((r) => {
              setOpen(false);
              notify({ kind: 'info', text: r.created ? `Certificate ${r.certificate.number} issued and signed.` : `Nothing changed: ${r.certificate.number} is still the valid certificate.` });
              void navigate(`/certificates/${r.certificate.number}`);
            }, () => undefined);
          }} />
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
  const show = (kind: 'reissue' | 'revoke') => { reissue.reset(); revoke.reset(); setOpen(kind); };
  return (
    <div className="flex gap-2">
      <Button variant="quiet" onClick={() => show('reissue')}>Reissue…</Button>
      <Button variant="quiet" onClick={() => show('revoke')}>Withdraw…</Button>
      {open && (
        <ConfirmDialog key={open} open variant={open === 'revoke' ? 'danger' : 'primary'}
          title={open === 'reissue' ? `Issue the next revision of ${number}?` : `Withdraw ${number}?`}
          confirmLabel={open === 'reissue' ? (reissue.isPending ? 'Rendering and signing…' : 'Issue the next revision') : 'Withdraw the certificate'}
          consequences={open === 'reissue'
            ? ['The next revision is rendered from the campaign’s current result and signed.', `${number} is marked replaced; verifying it names the new revision.`, 'The participants are mailed what was corrected.']
            : [`${number} is marked withdrawn; anyone who verifies the file is told so, with your reason.`, 'This cannot be undone; a new certificate needs a new issue.', 'The participants are mailed the reason.']}
          fields={[open === 'reissue'
            ? { name: 'reason', label: 'What was corrected?', required: true, minLength: 3, rows: 3 }
            : { name: 'reason', label: 'Why is the certificate withdrawn?', required: true, minLength: 3, rows: 3 }]}
          pending={mutation.isPending} error={mutation.isError ? describeError(mutation.error) : null} onCancel={() => setOpen(null)}
          onConfirm={(v) => mutation.mutateAsync({ number, reason: v.reason }).then((c) => {
            setOpen(null);
            notify({ kind: 'info', text: open === 'reissue' ? `Revision ${c.number} issued; ${number} is marked replaced.` : `${number} withdrawn; participants are notified.` });
            if (c.number !== number) void navigate(`/certificates/${c.number}`);
          }, () => undefined)} />
      )}
    </div>
  );
}
