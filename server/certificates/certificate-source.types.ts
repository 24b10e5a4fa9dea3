import type { CertificateSnapshot } from '../../shared/certificates';

/** What a certificate shows that comes from the campaign and its result (the rest is added at issue time). */
export type SnapshotBody = Omit<
  CertificateSnapshot,
  'certificateNumber' | 'revision' | 'issueDate' | 'issuingInstitute' | 'auditChainHead' | 'signer' | 'verificationUrl'
>;

export interface CertificateSource {
  campaignId: string;
  campaignLabel: string;
  campaignState: string;
  instituteAId: string | null;
  instituteBId: string | null;
  resultId: string | null;
  body: SnapshotBody;
}
