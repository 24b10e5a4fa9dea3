import type { DataSource, EntityManager } from 'typeorm';
import type { VerificationResult, VerificationVerdict } from '../../shared/certificate-registry';
import type { CertificateSnapshot } from '../../shared/certificates';
import type { AppConfig } from '../config';
import { CertificateEntity, type CertificateRow } from '../db/entities/certificates.entities';
import { instituteCa, instituteSubject, latestCrl, legacyCertificatePem, trustedTsaRoots } from './institute-identity';
import { sha256Hex } from './issue';
import { verifySignedPdf, type TrustAnchors } from './pdf/verify-pdf';

// Public verification: the signature is checked against the pinned institute root CA and the trusted TSA roots
// (and, for files of the first releases, the pinned self-signed certificate), then the file's
// SHA-256 (or the number and SHA-256 someone read off a file) is looked up in the registry.

const headlines: Record<VerificationVerdict, string> = {
  valid: 'This certificate was issued here, the file is exactly as signed, and it is still valid.',
  superseded: 'This file is genuine, but the certificate has been replaced by a newer revision.',
  revoked: 'This file is genuine, but the certificate has been withdrawn and must not be relied on.',
  'not-issued-here': 'No certificate matching this was issued here.',
  tampered: 'This file has been changed after signing, or was not signed by the issuing institute.',
  unsigned: 'This file carries no signature, so it cannot be a certificate issued here.',
};

type Tamper = NonNullable<VerificationResult['tamper']>;
/** Sorts the signature check's reason into what a reader needs to know. */
function tamperOf(reason: string | undefined): Tamper {
  if (!reason) return 'damaged-signature';
  if (/appended|were changed|does not start at the beginning|does not match the file/.test(reason)) return 'changed-after-signing';
  if (/certificate other than the pinned|signer certificate is not included|does not verify with the pinned/.test(reason)) return 'foreign-signature';
  return 'damaged-signature';
}
const tamperHeadlines: Record<Tamper, string> = {
  'changed-after-signing': 'This file was changed after signing: it is not the file the issuing institute signed.',
  'foreign-signature': 'This file was not signed by the issuing institute: the signature belongs to another key.',
  'damaged-signature': 'The signature in this file is damaged or incomplete, so the file cannot be trusted.',
};

async function newestNumber(manager: EntityManager, row: CertificateRow): Promise<string | null> {
  const newest = await manager.getRepository(CertificateEntity).findOne({ where: { year: row.year, serial: row.serial }, order: { revision: 'DESC' } });
  return newest && newest.number !== row.number ? newest.number : null;
}

async function describe(manager: EntityManager, row: CertificateRow) {
  const snapshot = await manager.getRepository(CertificateEntity).createQueryBuilder('c').select('c.id').addSelect('c.snapshot').where('c.id = :id', { id: row.id }).getOne();
  const superseding = row.supersededBy ? await manager.getRepository(CertificateEntity).findOneBy({ id: row.supersededBy }) : null;
  return {
    number: row.number,
    state: row.state,
    issuedAt: row.issuedAt.toISOString(),
    issuingInstitute: (snapshot?.snapshot as unknown as CertificateSnapshot | undefined)?.issuingInstitute ?? '',
    kind: row.kind,
    campaignLabel: row.campaignLabel,
    pdfSha256: row.pdfSha256,
    supersededByNumber: superseding?.number ?? null,
    latestNumber: await newestNumber(manager, row),
    revokedAt: row.revokedAt?.toISOString() ?? null,
    revocationReason: row.revocationReason,
    signingKeyRevokedAt: await signingKeyRevokedAt(manager, row.id),
  };
}

async function signingKeyRevokedAt(manager: EntityManager, id: string): Promise<string | null> {
  const rows: { at: Date | null }[] = await manager.query(`SELECT signing_key_revoked_at AS at FROM certificate WHERE id = $1`, [id]);
  return rows[0]?.at?.toISOString() ?? null;
}

/** The pinned trust anchors: the institute root, the TSA roots, the legacy certificate and the newest CRL. */
export async function trustAnchors(manager: EntityManager, config: AppConfig): Promise<TrustAnchors> {
  const ca = await instituteCa(config, await instituteSubject(manager));
  const crl = await latestCrl(manager);
  const legacy = await legacyCertificatePem(config);
  return {
    instituteRoots: [ca.rootDer],
    tsaRoots: await trustedTsaRoots(config),
    ...(legacy ? { legacyCertificatePem: legacy } : {}),
    ...(crl ? { currentCrl: crl.der } : {}),
  };
}

/** The headline for a registered certificate, saying when it is a chain certificate. */
function headlineFor(row: CertificateRow, verdict: VerificationVerdict): string {
  const text = headlines[verdict];
  return row.kind === 'chain' ? text.replace(/^This certificate/, 'This chain certificate').replace('but the certificate', 'but the chain certificate') : text;
}

function stateVerdict(row: CertificateRow): VerificationVerdict {
  return row.state === 'valid' ? 'valid' : row.state;
}

function stateReason(c: Awaited<ReturnType<typeof describe>>): string | null {
  const reason = registryReason(c);
  if (!c.signingKeyRevokedAt) return reason;
  const key = `the key that signed this certificate was withdrawn on ${c.signingKeyRevokedAt} after a compromise; upload the file to check whether its time-stamp predates the compromise`;
  return reason ? `${reason}; ${key}` : key;
}

function registryReason(c: Awaited<ReturnType<typeof describe>>): string | null {
  if (c.state === 'superseded') return `replaced by ${c.supersededByNumber}${c.latestNumber && c.latestNumber !== c.supersededByNumber ? `; the newest revision is ${c.latestNumber}` : ''}`;
  if (c.state === 'revoked') return `withdrawn on ${c.revokedAt}: ${c.revocationReason}`;
  return null;
}

export function createVerificationService(dataSource: DataSource, config: AppConfig) {
  return {
    async verifyFile(pdf: Buffer): Promise<VerificationResult> {
      const manager = dataSource.manager;
      const signature = await verifySignedPdf(pdf, await trustAnchors(manager, config));
      const file = { sha256: sha256Hex(pdf), bytes: pdf.length, numberInFile: signature.certificateNumber ?? null, signingTime: signature.signingTime ?? null };
      const base = { checkedBy: 'file' as const, file, signature: signature.report ?? null };
      if (signature.status !== 'valid') {
        // A file whose signature does not verify proves nothing, so it learns nothing about any record (not even
        // whether the number it names exists): anyone can write a number into a file.
        const verdict: VerificationVerdict = signature.status;
        // A file whose signature does not verify gets no record (it would disclose one to anybody naming a number).
        const tamper = verdict === 'tampered' ? tamperOf(signature.reason) : null;
        // One exception: a file signed with the institute's own key, untouched, whose key was later withdrawn as
        // compromised. Its holder holds the registered file itself (same SHA-256), so its record may be shown.
        const withdrawnKey = verdict === 'tampered' && /signing key was withdrawn/.test(signature.reason ?? '');
        const registered = withdrawnKey ? await manager.getRepository(CertificateEntity).findOneBy({ pdfSha256: file.sha256 }) : null;
        const certificate = registered && (!file.numberInFile || registered.number === file.numberInFile) ? await describe(manager, registered) : null;
        return { ...base, verdict, tamper, headline: tamper ? tamperHeadlines[tamper] : headlines[verdict], reason: signature.reason ?? null, certificate };
      }
      const row = await manager.getRepository(CertificateEntity).findOneBy({ pdfSha256: file.sha256 });
      if (!row || (file.numberInFile && row.number !== file.numberInFile)) {
        return {
          ...base, verdict: 'not-issued-here', headline: headlines['not-issued-here'],
          reason: file.numberInFile
            ? `the signature is in order, but no file with this SHA-256 was registered under ${file.numberInFile}`
            : 'the signature is in order, but the file names no certificate number and its SHA-256 is not registered',
          certificate: null,
        };
      }
      const certificate = await describe(manager, row);
      const verdict = stateVerdict(row);
      return { ...base, verdict, headline: headlineFor(row, verdict), reason: stateReason(certificate), certificate };
    },

    async verifyNumber(number: string, sha256: string): Promise<VerificationResult> {
      // The caller proves only that they know a number and a SHA-256: the answer is the state of that exact file
      // or "not issued here" — the same words for an unknown number as for a known one with another digest, and
      // no details of the record (those come with a check of the file itself).
      const row = await dataSource.manager.getRepository(CertificateEntity).findOneBy({ number, pdfSha256: sha256 });
      const base = { checkedBy: 'number-and-sha256' as const, file: null, certificate: null };
      if (!row) {
        return { ...base, verdict: 'not-issued-here', headline: headlines['not-issued-here'], reason: `no certificate numbered ${number} with this SHA-256 was issued here` };
      }
      const verdict = stateVerdict(row);
      const revokedAt = await signingKeyRevokedAt(dataSource.manager, row.id);
      const keyNote = revokedAt ? `the key that signed this certificate was withdrawn on ${revokedAt} after a compromise; upload the file to check whether its time-stamp predates the compromise` : null;
      const stateNote = verdict === 'valid' ? null : 'check the file itself (upload it) for the newer revision or the reason for the withdrawal';
      const reason = [stateNote, keyNote].filter(Boolean).join('; ') || null;
      return { ...base, verdict, headline: headlineFor(row, verdict), reason };
    },
  };
}
