import { EntitySchema } from 'typeorm';

// The certificate registry (migration 1764700000000). The signed PDF and its snapshot are stored as issued;
// only state, supersession and revocation columns ever change.

export type CertificateState = 'valid' | 'superseded' | 'revoked';

export interface CertificateRow {
  id: string;
  number: string;
  year: number;
  serial: number;
  revision: number;
  /** A campaign's certificate, or a calibration chain's (migration 1766100000000): exactly one of the two ids is set. */
  kind: 'campaign' | 'chain';
  campaignId: string | null;
  chainId: string | null;
  resultId: string | null;
  /** SHA-256 over the inputs the snapshot was built from; an unchanged campaign has the same fingerprint. */
  resultFingerprint: string;
  instituteAId: string | null;
  instituteBId: string | null;
  campaignLabel: string;
  state: CertificateState;
  supersededBy: string | null;
  supersededAt: Date | null;
  revokedAt: Date | null;
  revokedBy: string | null;
  revocationReason: string | null;
  issuedBy: string | null;
  issuedByLabel: string;
  issuedAt: Date;
  pdf: Buffer;
  pdfSha256: string;
  pdfBytes: number;
  snapshot: Record<string, unknown>;
}

export const CertificateEntity = new EntitySchema<CertificateRow>({
  name: 'Certificate',
  tableName: 'certificate',
  columns: {
    id: { type: 'uuid', primary: true, generated: 'uuid' },
    number: { type: 'text', unique: true },
    year: { type: 'int' },
    serial: { type: 'int' },
    revision: { type: 'int' },
    kind: { type: 'text', default: 'campaign' },
    campaignId: { name: 'campaign_id', type: 'uuid', nullable: true },
    chainId: { name: 'chain_id', type: 'uuid', nullable: true },
    resultId: { name: 'result_id', type: 'text', nullable: true },
    resultFingerprint: { name: 'result_fingerprint', type: 'text' },
    instituteAId: { name: 'institute_a_id', type: 'uuid', nullable: true },
    instituteBId: { name: 'institute_b_id', type: 'uuid', nullable: true },
    campaignLabel: { name: 'campaign_label', type: 'text' },
    state: { type: 'text', default: 'valid' },
    supersededBy: { name: 'superseded_by', type: 'uuid', nullable: true },
    supersededAt: { name: 'superseded_at', type: 'timestamptz', nullable: true },
    revokedAt: { name: 'revoked_at', type: 'timestamptz', nullable: true },
    revokedBy: { name: 'revoked_by', type: 'uuid', nullable: true },
    revocationReason: { name: 'revocation_reason', type: 'text', nullable: true },
    issuedBy: { name: 'issued_by', type: 'uuid', nullable: true },
    issuedByLabel: { name: 'issued_by_label', type: 'text' },
    issuedAt: { name: 'issued_at', type: 'timestamptz', default: () => 'now()' },
    // Selected only where the file itself is needed (download, verification by bytes).
    pdf: { type: 'bytea', select: false },
    pdfSha256: { name: 'pdf_sha256', type: 'text', unique: true },
    pdfBytes: { name: 'pdf_bytes', type: 'int' },
    snapshot: { type: 'jsonb', select: false },
  },
});
