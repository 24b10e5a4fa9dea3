import type { DataSource, EntityManager } from 'typeorm';
import type { VerificationResult, VerificationVerdict } from '../../shared/certificate-registry';
import type { CertificateSnapshot } from '../../shared/certificates';
import type { AppConfig } from '../config';
import { CertificateEntity, type CertificateRow } from '../db/entities/certificates.entities';
import { coordinatingInstitute, instituteSigningIdentity } from './institute-identity';
import { sha256Hex } from './issue';
import { verifySignedPdf } from './pdf/verify-pdf';

// Public verification: the signature is checked against the pinned institute certificate, then the file's
// SHA-256 (or the number and SHA-256 someone read off a file) is looked up in the registry.

const headlines: Record<VerificationVerdict, string> = {
  valid: 'This certificate was issued here, the file is exactly as signed, and it is still valid.',
  superseded: 'This file is genuine, but the certificate has been replaced by a newer revision.',
  revoked: 'This file is genuine, but the certificate has been withdrawn and must not be relied on.',
  'not-issued-here': 'No certificate matching this was issued here.',
  tampered: 'This file has been changed after signing, or was not signed by the issuing institute.',
  unsigned: 'This file carries no signature, so it cannot be a certificate issued here.',
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
    campaignLabel: row.campaignLabel,
    pdfSha256: row.pdfSha256,
    supersededByNumber: superseding?.number ?? null,
    latestNumber: await newestNumber(manager, row),
    revokedAt: row.revokedAt?.toISOString() ?? null,
    revocationReason: row.revocationReason,
  };
}

function stateVerdict(row: CertificateRow): VerificationVerdict {
  return row.state === 'valid' ? 'valid' : row.state;
}

function stateReason(c: Awaited<ReturnType<typeof describe>>): string | null {
  if (c.state === 'superseded') return `replaced by ${c.supersededByNumber}${c.latestNumber && c.latestNumber !== c.supersededByNumber ? `; the newest revision is ${c.latestNumber}` : ''}`;
  if (c.state === 'revoked') return `withdrawn on ${c.revokedAt}: ${c.revocationReason}`;
  return null;
}

export function createVerificationService(dataSource: DataSource, config: AppConfig) {
  async function pinnedCertificatePem(): Promise<string> {
    const institute = await coordinatingInstitute(dataSource.manager);
    const name = institute?.name ?? 'Coordinating institute';
    return (await instituteSigningIdentity(config, { commonName: `${name} certificate signing`, organization: name })).certificatePem;
  }

  return {
    async verifyFile(pdf: Buffer): Promise<VerificationResult> {
      const manager = dataSource.manager;
      const signature = await verifySignedPdf(pdf, await pinnedCertificatePem());
      const file = { sha256: sha256Hex(pdf), bytes: pdf.length, numberInFile: signature.certificateNumber ?? null, signingTime: signature.signingTime ?? null };
      const base = { checkedBy: 'file' as const, file };
      if (signature.status !== 'valid') {
        // A file whose signature does not verify proves nothing, so it learns nothing about any record (not even
        // whether the number it names exists): anyone can write a number into a file.
        const verdict: VerificationVerdict = signature.status;
        return { ...base, verdict, headline: headlines[verdict], reason: signature.reason ?? null, certificate: null };
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
      return { ...base, verdict, headline: headlines[verdict], reason: stateReason(certificate), certificate };
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
      const reason = verdict === 'valid' ? null : 'check the file itself (upload it) for the newer revision or the reason for the withdrawal';
      return { ...base, verdict, headline: headlines[verdict], reason };
    },
  };
}
