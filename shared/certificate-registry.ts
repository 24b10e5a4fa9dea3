import { z } from 'zod';
import { signatureReportSchema } from './certificate-signature';
import { certificateNumberSchema } from './certificates';

// API contract of the certificate registry: issuing, supersession, revocation, verification and reading.
// The snapshot itself (what a certificate shows) is certificateSnapshotSchema in shared/certificates.ts.

export const certificateStates = ['valid', 'superseded', 'revoked'] as const;
export const certificateStateSchema = z.enum(certificateStates);
export type CertificateState = z.infer<typeof certificateStateSchema>;

export const certificateStateLabels: Record<CertificateState, string> = {
  valid: 'Valid',
  superseded: 'Replaced by a newer revision',
  revoked: 'Withdrawn',
};

const instituteRef = z.object({ id: z.string(), code: z.string(), name: z.string() }).nullable();

export const certificateSummarySchema = z.object({
  id: z.string().uuid(),
  number: certificateNumberSchema,
  year: z.number().int(),
  serial: z.number().int(),
  revision: z.number().int(),
  /** A campaign's certificate, or a calibration chain's; campaignLabel is then the chain's name. */
  kind: z.enum(['campaign', 'chain']),
  campaignId: z.string().uuid().nullable(),
  chainId: z.string().uuid().nullable(),
  campaignLabel: z.string(),
  instituteA: instituteRef,
  instituteB: instituteRef,
  state: certificateStateSchema,
  issuedAt: z.iso.datetime(),
  issuedBy: z.string(),
  pdfSha256: z.string(),
  pdfBytes: z.number().int(),
  supersededByNumber: z.string().nullable(),
  supersededAt: z.iso.datetime().nullable(),
  revokedAt: z.iso.datetime().nullable(),
  revocationReason: z.string().nullable(),
});
export type CertificateSummary = z.infer<typeof certificateSummarySchema>;

/** Value, U and k; p and ν_eff where the snapshot records them (null ν_eff: infinite). */
const detailQuantity = z.object({
  value: z.number(), expandedUncertainty: z.number(), coverageFactor: z.number(),
  coverageProbability: z.number().optional(), effectiveDegreesOfFreedom: z.number().nullable().optional(),
});

export const certificateDetailSchema = certificateSummarySchema.extend({
  /** Every revision with the same year and serial, oldest first (this one included). */
  revisions: z.array(z.object({ number: z.string(), revision: z.number().int(), state: certificateStateSchema, issuedAt: z.iso.datetime() })),
  /** The newest revision of this certificate, when this one is not it. */
  latestNumber: z.string().nullable(),
  auditChainHead: z.string(),
  measurementPeriod: z.object({ start: z.string(), end: z.string() }),
  deltaC_m2s2: detailQuantity,
  deltaH_m: detailQuantity,
  /** Campaign: Eₙ against the registered heights. Chain: Eₙ of its before/after calibrations (null with one calibration). */
  En: z.number().nullable(),
  agreed: z.boolean().nullable(),
  /** Chain certificates: what the Eₙ above compares, and the campaigns the chain is built from. */
  chain: z.object({
    fromSite: z.string(), toSite: z.string(),
    campaigns: z.array(z.object({ id: z.string().uuid(), label: z.string(), role: z.string() })),
  }).nullable().optional(),
});
export type CertificateDetail = z.infer<typeof certificateDetailSchema>;

export const certificateListQuerySchema = z.object({
  page: z.coerce.number().int().min(1).default(1),
  pageSize: z.coerce.number().int().min(1).max(200).default(25),
  sort: z.enum(['number', 'issuedAt', 'state', 'campaignLabel']).optional(),
  order: z.enum(['asc', 'desc']).default('desc'),
  q: z.string().max(200).optional(),
  state: certificateStateSchema.optional(),
  instituteId: z.string().uuid().optional(),
  campaignId: z.string().uuid().optional(),
  chainId: z.string().uuid().optional(),
  kind: z.enum(['campaign', 'chain']).optional(),
  /** Issued on or after this date (ISO 8601 date or date-time, UTC). */
  issuedFrom: z.iso.date().or(z.iso.datetime()).optional(),
  /** Issued before the end of this date. */
  issuedTo: z.iso.date().or(z.iso.datetime()).optional(),
});
export type CertificateListQuery = z.infer<typeof certificateListQuerySchema>;

export const certificateNumberParamsSchema = z.object({ number: certificateNumberSchema });
export const campaignIdParamsSchema = z.object({ id: z.string().uuid() });

export const reissueCertificateSchema = z.object({
  reason: z.string().trim().min(3, 'say what was corrected').max(2000),
  /** Needed when the campaign has review exceptions and the previous revision carries no justification. */
  justification: z.string().trim().min(10, 'explain in at least 10 characters why this is acceptable').max(4000).optional(),
});
export type ReissueCertificate = z.infer<typeof reissueCertificateSchema>;

export const revokeCertificateSchema = z.object({
  reason: z.string().trim().min(3, 'a reason is required').max(2000),
});
export type RevokeCertificate = z.infer<typeof revokeCertificateSchema>;

export const verificationVerdicts = ['valid', 'superseded', 'revoked', 'not-issued-here', 'tampered', 'unsigned'] as const;
export const verificationVerdictSchema = z.enum(verificationVerdicts);
export type VerificationVerdict = z.infer<typeof verificationVerdictSchema>;

export const verificationResultSchema = z.object({
  verdict: verificationVerdictSchema,
  /** One plain sentence for the public page. */
  headline: z.string(),
  /** Technical reason from the signature check or the registry, when not valid. */
  reason: z.string().nullable(),
  /** For a broken signature: what the check found (changed or extended after signing, or another signer). */
  tamper: z.enum(['changed-after-signing', 'foreign-signature', 'damaged-signature']).nullable().optional(),
  checkedBy: z.enum(['file', 'number-and-sha256']),
  file: z
    .object({ sha256: z.string(), bytes: z.number().int(), numberInFile: z.string().nullable(), signingTime: z.string().nullable() })
    .nullable(),
  certificate: z
    .object({
      number: z.string(),
      state: certificateStateSchema,
      issuedAt: z.iso.datetime(),
      issuingInstitute: z.string(),
      /** 'chain': the certificate of a calibration chain (campaignLabel is the chain's name). */
      kind: z.enum(['campaign', 'chain']).optional(),
      campaignLabel: z.string(),
      pdfSha256: z.string(),
      supersededByNumber: z.string().nullable(),
      latestNumber: z.string().nullable(),
      revokedAt: z.iso.datetime().nullable(),
      revocationReason: z.string().nullable(),
      /** When the key that signed this certificate was withdrawn (compromise); null while it stands. */
      signingKeyRevokedAt: z.iso.datetime().nullable().optional(),
    })
    .nullable(),
  /** The signature checks of an uploaded file (absent for a check by number and SHA-256). */
  signature: signatureReportSchema.nullable().optional(),
});
export type VerificationResult = z.infer<typeof verificationResultSchema>;

export const verifyByNumberQuerySchema = z.object({
  number: certificateNumberSchema,
  sha256: z
    .string()
    .trim()
    .transform((s) => s.replace(/\s+/g, '').toLowerCase())
    .pipe(z.string().regex(/^[0-9a-f]{64}$/, 'expected the 64 hex digits of a SHA-256')),
});
export type VerifyByNumberQuery = z.infer<typeof verifyByNumberQuerySchema>;

/** Largest certificate file the public verification accepts (ours are well under 1 MiB). */
export const VERIFY_UPLOAD_LIMIT_BYTES = 20 * 1024 * 1024;
