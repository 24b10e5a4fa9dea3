import { Fragment } from 'react';
import type { SignatureReport } from '../../../shared/certificate-signature';
import { useTrustAnchor } from '../../api/certificates';

// What the public check found out about the signature itself: the level reached, the chain up to the pinned
// root, the trusted time, revocation, the files inside the certificate, and each check with what it used.

const levelText: Record<SignatureReport['level'], string> = {
  legacy: 'Legacy signature: made with the self-signed institute key of the first releases, without a trusted time-stamp or revocation data.',
  'B-B': 'Basic signature (PAdES B-B): no trusted time-stamp.',
  'B-T': 'Signature with a trusted time-stamp (PAdES B-T); the file carries no long-term validation data.',
  'B-LT': 'Long-term validation data in the file (PAdES B-LT): chain and CRLs are embedded, so it can be checked offline.',
  'B-LTA': 'Long-term archival form (PAdES B-LTA): chain, CRLs and a document time-stamp over everything are embedded; it can be checked offline, years from now.',
};

const utc = (iso: string | null | undefined) => (iso ? `${iso.replace('T', ' ').slice(0, 19)} UTC` : '—');

export function SignatureReportPanel({ report }: { report: SignatureReport }) {
  return (
    <section className="rounded-lg border border-ink-200 bg-white p-5 text-sm" data-testid="signature-report" data-level={report.level}>
      <h2 className="text-base font-semibold">The signature in detail</h2>
      <p className="mt-1" data-testid="signature-level"><span className="font-mono font-semibold">{report.level}</span> · {levelText[report.level]}</p>
      <dl className="mt-3 grid grid-cols-[max-content_1fr] gap-x-4 gap-y-1">
        <dt className="text-ink-500">Signing time (time-stamp)</dt>
        <dd data-testid="signature-time">{report.timeStamp ? `${utc(report.timeStamp.time)}, by ${report.timeStamp.tsa}` : 'no trusted time-stamp'}</dd>
        <dt className="text-ink-500">Time the signer stated</dt><dd>{utc(report.claimedSigningTime)}</dd>
        <dt className="text-ink-500">Document time-stamp</dt><dd>{report.documentTimeStamp ? `${utc(report.documentTimeStamp.time)}, by ${report.documentTimeStamp.tsa}` : 'none'}</dd>
        <dt className="text-ink-500">Revocation</dt><dd data-testid="signature-revocation">{report.revocation.status}: {report.revocation.detail}</dd>
        <dt className="text-ink-500">Validation data in the file</dt><dd>{report.dss ? `${report.dss.certificates} certificates, ${report.dss.crls} CRLs` : 'none'}</dd>
      </dl>
      <h3 className="mt-4 font-semibold">Chain of trust</h3>
      <ol className="mt-1 space-y-1" data-testid="signature-chain">
        {report.chain.map((c, i) => (
          <li key={c.sha256} className="rounded bg-paper-50 px-3 py-2">
            <span className="text-ink-500">{i === 0 ? 'Signing certificate' : i === report.chain.length - 1 ? 'Root (pinned)' : 'Intermediate'}:</span> {c.subject}
            <span className="block break-all font-mono text-xs text-ink-500">SHA-256 {c.sha256} · serial {c.serial} · valid {c.notBefore.slice(0, 10)} to {c.notAfter.slice(0, 10)}</span>
          </li>
        ))}
      </ol>
      <h3 className="mt-4 font-semibold">Files inside the certificate</h3>
      {report.attachments.length === 0 ? (
        <p className="text-ink-500">none</p>
      ) : (
        <ul className="mt-1 space-y-1" data-testid="signature-attachments">
          {report.attachments.map((a) => (
            <li key={a.name}>
              <span className="font-mono">{a.name}</span> ({a.mime ?? 'unknown type'}, {a.bytes} bytes, relationship {a.relationship ?? '—'}) — {a.description}
              <span className="block break-all font-mono text-xs text-ink-500">SHA-256 {a.sha256}</span>
            </li>
          ))}
          <li className="text-xs text-ink-500">They are covered by the signature. Open them from your PDF reader’s attachments panel, or run <code>pdfdetach -saveall</code> or <code>npm run admin -- extract &lt;file&gt;</code>.</li>
        </ul>
      )}
      <h3 className="mt-4 font-semibold">What was checked, and against what</h3>
      <table className="mt-1 w-full text-left text-xs" data-testid="signature-checks">
        <thead><tr className="text-ink-500"><th className="py-1 pr-2">Check</th><th className="py-1 pr-2">Against</th><th className="py-1">Result</th></tr></thead>
        <tbody>
          {report.checks.map((c) => (
            <tr key={c.check} className="border-t border-ink-100">
              <td className="py-1 pr-2">{c.check}</td><td className="py-1 pr-2">{c.against}{c.detail ? ` (${c.detail})` : ''}</td>
              <td className={`py-1 font-semibold ${c.passed ? 'text-agree-800' : 'text-disagree-800'}`}>{c.passed ? 'passed' : 'not met'}</td>
            </tr>
          ))}
        </tbody>
      </table>
    </section>
  );
}

export function TrustAnchorPanel() {
  const anchor = useTrustAnchor();
  if (!anchor.data) return null;
  const a = anchor.data;
  return (
    <section className="rounded-lg border border-ink-200 bg-white p-5 text-sm" data-testid="trust-anchor">
      <h2 className="text-base font-semibold">Check it yourself, offline</h2>
      <p className="mt-1 text-ink-600">
        Certificates are signed under the institute’s own root certificate. Install it in your PDF reader (as a trusted
        certificate for signed documents) or in an NSS store, compare the fingerprint with the one the institute publishes,
        and your reader will validate the signature without this page.
      </p>
      <dl className="mt-3 grid grid-cols-[max-content_1fr] gap-x-4 gap-y-1">
        <dt className="text-ink-500">Root certificate</dt><dd>{a.subject}</dd>
        <dt className="text-ink-500">SHA-256 fingerprint</dt><dd className="break-all font-mono text-xs" data-testid="trust-anchor-fingerprint">{a.sha256Fingerprint}</dd>
        <dt className="text-ink-500">Valid</dt><dd>{a.notBefore.slice(0, 10)} to {a.notAfter.slice(0, 10)}</dd>
        <dt className="text-ink-500">Download</dt>
        <dd><a className="text-brass-700 underline" href={a.pemUrl} data-testid="trust-anchor-download">PEM</a> · <a className="text-brass-700 underline" href={a.derUrl}>DER (.cer)</a> · <a className="text-brass-700 underline" href={a.crlUrl}>current CRL</a></dd>
        {a.tsaRoots.map((t) => (
          <Fragment key={t.sha256Fingerprint}>
            <dt className="text-ink-500">Time-stamping root</dt>
            <dd className="break-all">{t.subject} · <span className="font-mono text-xs">{t.sha256Fingerprint}</span></dd>
          </Fragment>
        ))}
      </dl>
    </section>
  );
}
