import { zodResolver } from '@hookform/resolvers/zod';
import { useEffect, useRef, useState, type ReactNode } from 'react';
import { useForm } from 'react-hook-form';
import { Link, useSearchParams } from 'react-router';
import { z } from 'zod';
import { verifyByNumberQuerySchema, type VerificationResult, type VerificationVerdict } from '../../../shared/certificate-registry';
import { useVerifyFile, useVerifyNumber } from '../../api/certificates';
import { Button, Caution, Field, inputClass, Panel } from '../../components/ui';
import { describeError } from '../../lib/api-client';
import { SignatureReportPanel, TrustAnchorPanel } from './signature-report';

// The public check anyone can run on a certificate they were sent: outside the sign-in gate.

const tamperTitles: Record<NonNullable<VerificationResult['tamper']>, string> = {
  'changed-after-signing': 'Changed after signing',
  'foreign-signature': 'Signed by someone else',
  'damaged-signature': 'Signature damaged',
};

const verdictStyle: Record<VerificationVerdict, { mark: string; title: string; box: string }> = {
  valid: { mark: '✓', title: 'Valid', box: 'border-agree-600 bg-agree-100 text-agree-800' },
  superseded: { mark: '↻', title: 'Replaced by a newer revision', box: 'border-brass-500 bg-paper-100 text-ink-800' },
  revoked: { mark: '⊘', title: 'Withdrawn', box: 'border-disagree-600 bg-disagree-100 text-disagree-800' },
  'not-issued-here': { mark: '?', title: 'Not issued here', box: 'border-ink-400 bg-ink-50 text-ink-800' },
  tampered: { mark: '✗', title: 'Signature does not hold', box: 'border-disagree-600 bg-disagree-100 text-disagree-800' },
  unsigned: { mark: '✗', title: 'Not signed', box: 'border-disagree-600 bg-disagree-100 text-disagree-800' },
};

function explanation(r: VerificationResult): string {
  const c = r.certificate;
  const day = (iso: string | null | undefined) => (iso ? iso.slice(0, 10) : '');
  switch (r.verdict) {
    case 'valid':
      return r.checkedBy === 'file'
        ? `The file you checked is, byte for byte, the file signed and registered under ${c?.number} on ${day(c?.issuedAt)}. Nobody has changed it since, and the certificate has been neither replaced nor withdrawn.`
        : 'A certificate with this number and exactly this SHA-256 was issued here and is still in force. This check trusts the digest you typed: compute it from the file you hold, or upload the file for the full record.';
    case 'superseded':
      if (r.checkedBy !== 'file') return 'A certificate with this number and SHA-256 was issued here, but a corrected revision was issued later. Upload the file to see which revision replaces it, and rely on the newest.';
      return `The file is genuine, but a corrected revision was issued later${c?.supersededByNumber ? ` (${c.supersededByNumber})` : ''}${c?.latestNumber && c.latestNumber !== c.supersededByNumber ? `; the newest is ${c.latestNumber}` : ''}. Its figures may have changed: rely on the newest revision and ask the sender for it.`;
    case 'revoked':
      if (r.checkedBy !== 'file') return 'A certificate with this number and SHA-256 was issued here, but the issuing institute withdrew it. Do not rely on its figures; upload the file to read the reason given.';
      return `The file is genuine, but the issuing institute withdrew this certificate on ${day(c?.revokedAt)}. Reason given: “${c?.revocationReason}”. Do not rely on its figures.`;
    case 'not-issued-here':
      return 'Either this number is unknown here, or the file differs from the one registered under it. The document may come from another issuer, or it may be a different file that carries a known number. Ask the sender where it came from.';
    case 'tampered':
      if (r.reason?.includes('signing key was withdrawn')) {
        return 'The file was signed with a key the institute has since withdrawn as compromised, and the time-stamp shows it was signed after the compromise began. Do not rely on it; ask the issuer for a newly signed copy.';
      }
      if (r.tamper === 'changed-after-signing') return 'The institute’s signature covers the file as it was issued; bytes were changed or added to it afterwards. Whatever the added part says, it was not signed. Do not use this copy; ask the issuer for the original file.';
      if (r.tamper === 'foreign-signature') return 'The file carries a signature, but not one made with the issuing institute’s key. Do not use it; ask the issuer for the original file.';
      return 'The signature does not hold for this file: its content was changed after signing, bytes were put before or after the signed part, or it was signed with a key other than the issuing institute’s. Do not use it; ask the issuer for the original file.';
    case 'unsigned':
      return 'Certificates issued here always carry the issuing institute’s digital signature. This file has none, so it is at most a copy or a draft.';
  }
}

function ResultPanel({ result }: { result: VerificationResult }) {
  const style = verdictStyle[result.verdict];
  const c = result.certificate;
  return (
    <section className={`rounded-lg border-l-4 p-5 ${style.box}`} data-testid="verify-result" data-verdict={result.verdict} aria-live="polite">
      <p className="flex items-center gap-3 text-xl font-semibold">
        <span aria-hidden className="flex h-9 w-9 items-center justify-center rounded-full border-2 border-current text-lg">{style.mark}</span>
        <span data-testid="verify-verdict">{result.verdict === 'tampered' && result.tamper ? tamperTitles[result.tamper] : style.title}</span>
      </p>
      <p className="mt-2 font-medium">{result.headline}</p>
      <p className="mt-2 text-sm">{explanation(result)}</p>
      {result.reason && <p className="mt-2 text-xs"><span className="font-semibold">Technical reason:</span> {result.reason}</p>}
      <dl className="mt-4 grid grid-cols-[max-content_1fr] gap-x-4 gap-y-1 text-sm">
        {c && (
          <>
            <dt className="text-ink-500">Certificate</dt><dd className="font-mono">{c.number}</dd>
            {c.kind === 'chain'
              ? <><dt className="text-ink-500">Kind</dt><dd data-testid="verify-kind">chain certificate (calibration chain of a transportable clock)</dd><dt className="text-ink-500">Chain</dt><dd>{c.campaignLabel}</dd></>
              : <><dt className="text-ink-500">Campaign</dt><dd>{c.campaignLabel}</dd></>}
            <dt className="text-ink-500">Issued by</dt><dd>{c.issuingInstitute} on {c.issuedAt.slice(0, 10)}</dd>
            <dt className="text-ink-500">Registered SHA-256</dt><dd className="break-all font-mono text-xs">{c.pdfSha256}</dd>
          </>
        )}
        {result.file && (
          <>
            <dt className="text-ink-500">SHA-256 of your file</dt><dd className="break-all font-mono text-xs" data-testid="verify-file-sha">{result.file.sha256}</dd>
            <dt className="text-ink-500">Number in the file</dt><dd className="font-mono">{result.file.numberInFile ?? 'none found'}</dd>
            {result.file.signingTime && (<><dt className="text-ink-500">{result.signature?.timeStamp ? 'Signed at (trusted time-stamp)' : 'Signed at (as stated by the signer)'}</dt><dd>{result.file.signingTime.replace('T', ' ').slice(0, 19)} UTC</dd></>)}
          </>
        )}
      </dl>
    </section>
  );
}

const numberForm = z.object({ number: z.string().trim().min(1, 'enter the certificate number'), sha256: z.string().trim().min(1, 'enter the SHA-256 of the file') });

export function VerifyPage({ signedIn = false }: { signedIn?: boolean }) {
  const [params] = useSearchParams();
  const verifyFile = useVerifyFile();
  const verifyNumber = useVerifyNumber();
  const [file, setFile] = useState<File | null>(null);
  const [last, setLast] = useState<'file' | 'number' | null>(null);
  const form = useForm({
    resolver: zodResolver(numberForm.pipe(verifyByNumberQuerySchema)),
    defaultValues: { number: params.get('number') ?? '', sha256: params.get('sha256') ?? '' },
  });
  const current = last === 'file' ? verifyFile : last === 'number' ? verifyNumber : null;

  // A link that carries both the number and the SHA-256 (from a certificate page) is checked straight away.
  const autoChecked = useRef(false);
  const { mutate: checkNumber } = verifyNumber;
  useEffect(() => {
    if (autoChecked.current) return;
    autoChecked.current = true;
    const parsed = verifyByNumberQuerySchema.safeParse({ number: params.get('number') ?? '', sha256: params.get('sha256') ?? '' });
    if (parsed.success) {
      setLast('number');
      checkNumber(parsed.data);
    }
  }, [params, checkNumber]);

  const Frame = signedIn ? SignedInFrame : PublicFrame;
  return (
    <Frame>
        <div>
          <h1>Check a certificate</h1>
          <p className="mt-1 max-w-2xl text-sm text-ink-600">
            Were you sent a certificate of a clock comparison? Check here that it was issued by the coordinating institute,
            that the file is unchanged since it was signed, and that it has not been replaced or withdrawn. No sign-in needed;
            the file is checked and then discarded.
          </p>
        </div>
        <div className="grid gap-5 md:grid-cols-2">
          <Panel title="Upload the PDF">
            <form className="space-y-3" onSubmit={(e) => { e.preventDefault(); if (file) { setLast('file'); verifyFile.mutate(file); } }}>
              <Field label="Certificate file (PDF)" hint="The signature and the registry are both checked.">
                <input type="file" accept="application/pdf,.pdf" className={inputClass} data-testid="verify-file"
                  onChange={(e) => setFile(e.target.files?.[0] ?? null)} />
              </Field>
              <Button type="submit" disabled={!file || verifyFile.isPending}>{verifyFile.isPending ? 'Checking…' : 'Check the file'}</Button>
            </form>
          </Panel>
          <Panel title="Or type the number and SHA-256">
            <form className="space-y-3" onSubmit={form.handleSubmit((v) => { setLast('number'); verifyNumber.mutate(v); })}>
              <Field label="Certificate number" error={form.formState.errors.number?.message}>
                <input className={inputClass} placeholder="CL-2026-00001-r1" {...form.register('number')} />
              </Field>
              <Field label="SHA-256 of the file" error={form.formState.errors.sha256?.message} hint={<>64 hex digits, e.g. from <code>sha256sum certificate.pdf</code>; spaces are ignored.</>}>
                <input className={`${inputClass} font-mono text-xs`} {...form.register('sha256')} />
              </Field>
              <Button type="submit" disabled={verifyNumber.isPending}>Look it up</Button>
            </form>
          </Panel>
        </div>
        {current?.isError && <p role="alert" className="rounded-md bg-disagree-100 px-4 py-3 text-sm text-disagree-800">{describeError(current.error)}</p>}
        {current?.data && <ResultPanel result={current.data} />}
        {current?.data?.signature && <SignatureReportPanel report={current.data.signature} />}
        <TrustAnchorPanel />
        <Caution>
          A “valid” answer says that the certificate is authentic and still in force; it does not say that its figures suit your purpose.
          Uncertainties on certificates are expanded with coverage factor k = 2. Results of clock comparisons are for scientific
          comparison: verify them against your national datum authority and your lab’s quality procedures before any use for heights.
        </Caution>
    </Frame>
  );
}

/** Inside the signed-in frame, which carries the navigation and the demo note. */
function SignedInFrame({ children }: { children: ReactNode }) {
  return <div className="space-y-5">{children}</div>;
}

function PublicFrame({ children }: { children: ReactNode }) {
  return (
    <div className="min-h-screen bg-paper-50">
      <header className="bg-ink-800 px-8 py-5 text-paper-50">
        <div className="mx-auto flex max-w-4xl items-center justify-between gap-4">
          <div className="flex items-center gap-3">
            <img src="/favicon.svg" alt="" className="h-9 w-9" />
            <div>
              <p className="text-lg font-semibold">Chronolevel</p>
              <p className="text-xs text-ink-300">Certificate check, open to everyone</p>
            </div>
          </div>
          <Link to="/" className="text-sm text-brass-300">Sign in →</Link>
        </div>
      </header>
      <main className="mx-auto max-w-4xl space-y-5 px-8 py-8">
        {children}
        <p className="text-xs text-ink-400">Demo data in this installation is an invented scenario: institutes, people, sites and measurements do not exist.</p>
      </main>
    </div>
  );
}
