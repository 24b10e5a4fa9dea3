import { zodResolver } from '@hookform/resolvers/zod';
import { useState } from 'react';
import { useForm } from 'react-hook-form';
import { useNavigate } from 'react-router';
import { reissueCertificateSchema, revokeCertificateSchema, type CertificateSummary } from '../../../shared/certificate-registry';
import { useIssueCertificate, useReissueCertificate, useRevokeCertificate } from '../../api/certificates';
import { Button, Field, inputClass } from '../../components/ui';
import { describeError } from '../../lib/api-client';
import { notify } from '../../lib/notices';

// Coordinator actions on certificates. The server checks the role and the states again.

export function IssueCertificateButton({ campaignId }: { campaignId: string }) {
  const issue = useIssueCertificate();
  const navigate = useNavigate();
  return (
    <span className="inline-flex flex-col gap-1">
      <Button disabled={issue.isPending} onClick={() => {
        // mutateAsync: the button unmounts once the list shows the new certificate, and we still navigate.
        issue.mutateAsync(campaignId).then((r) => {
          notify({ kind: 'info', text: r.created ? `Certificate ${r.certificate.number} issued and signed.` : `Nothing changed: ${r.certificate.number} is still the valid certificate.` });
          void navigate(`/certificates/${r.certificate.number}`);
        }, () => undefined);
      }}>
        {issue.isPending ? 'Rendering and signing…' : 'Issue certificate'}
      </Button>
      {issue.isError && <span role="alert" className="text-xs text-disagree-600">{describeError(issue.error)}</span>}
    </span>
  );
}

function ReasonForm({ kind, number, onDone }: { kind: 'reissue' | 'revoke'; number: string; onDone: (c: CertificateSummary) => void }) {
  const reissue = useReissueCertificate();
  const revoke = useRevokeCertificate();
  const mutation = kind === 'reissue' ? reissue : revoke;
  const form = useForm({ resolver: zodResolver(kind === 'reissue' ? reissueCertificateSchema : revokeCertificateSchema), defaultValues: { reason: '' } });
  return (
    <form className="space-y-2 rounded-md border border-paper-200 bg-paper-50 p-3"
      onSubmit={form.handleSubmit((v) => mutation.mutateAsync({ number, reason: v.reason }).then(onDone, () => undefined))}>
      <Field label={kind === 'reissue' ? 'What was corrected?' : 'Why is the certificate withdrawn?'} error={form.formState.errors.reason?.message}
        hint={kind === 'reissue' ? 'The next revision is rendered from the campaign’s current result; this one is marked replaced.' : 'The reason is shown to anyone who checks the certificate, and mailed to the participants.'}>
        <textarea rows={3} className={inputClass} {...form.register('reason')} />
      </Field>
      {mutation.isError && <p role="alert" className="text-xs text-disagree-600">{describeError(mutation.error)}</p>}
      <Button type="submit" variant={kind === 'revoke' ? 'danger' : 'primary'} disabled={mutation.isPending}>
        {kind === 'reissue' ? (mutation.isPending ? 'Rendering and signing…' : 'Issue the next revision') : 'Withdraw the certificate'}
      </Button>
    </form>
  );
}

export function CertificateActions({ number }: { number: string }) {
  const [open, setOpen] = useState<'reissue' | 'revoke' | null>(null);
  const navigate = useNavigate();
  return (
    <div className="space-y-3">
      <div className="flex gap-2">
        <Button variant="quiet" onClick={() => setOpen(open === 'reissue' ? null : 'reissue')} aria-expanded={open === 'reissue'}>Reissue…</Button>
        <Button variant="quiet" onClick={() => setOpen(open === 'revoke' ? null : 'revoke')} aria-expanded={open === 'revoke'}>Withdraw…</Button>
      </div>
      {open && (
        <ReasonForm key={open} kind={open} number={number} onDone={(c) => {
          setOpen(null);
          notify({ kind: 'info', text: open === 'reissue' ? `Revision ${c.number} issued; ${number} is marked replaced.` : `${number} withdrawn; participants are notified.` });
          if (c.number !== number) void navigate(`/certificates/${c.number}`);
        }} />
      )}
    </div>
  );
}
