import { certificateSnapshotSchema, type CertificateSnapshot } from '../../../shared/certificates';

// The renderer trusts nothing it is handed: a snapshot is parsed against the shared schema first,
// so a PDF is never produced from a half-filled or inconsistent result.

export type { CertificateSnapshot, CertificateBudgetRow, CertificateAllanPoint } from '../../../shared/certificates';

export function parseCertificateSnapshot(input: unknown): CertificateSnapshot {
  return certificateSnapshotSchema.parse(input);
}
