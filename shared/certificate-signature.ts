import { z } from 'zod';

// What the verifier found out about a certificate's signature, for the public verification page: the level
// reached (PAdES baseline, ETSI EN 319 142-1), the chain, the trusted time, revocation, the embedded files,
// and every check with what it was checked against.

const certificateInfoSchema = z.object({
  subject: z.string(),
  issuer: z.string(),
  serial: z.string(),
  sha256: z.string(),
  notBefore: z.string(),
  notAfter: z.string(),
});

export const signatureLevels = ['legacy', 'B-B', 'B-T', 'B-LT', 'B-LTA'] as const;

export const signatureReportSchema = z.object({
  level: z.enum(signatureLevels),
  subFilter: z.string(),
  claimedSigningTime: z.string().nullable(),
  signer: certificateInfoSchema.nullable(),
  chain: z.array(certificateInfoSchema),
  timeStamp: z.object({ time: z.string(), tsa: z.string(), serial: z.string(), policy: z.string() }).nullable(),
  documentTimeStamp: z.object({ time: z.string(), tsa: z.string() }).nullable(),
  revocation: z.object({ status: z.enum(['good', 'revoked', 'revoked-after-signing', 'unknown']), detail: z.string() }),
  dss: z.object({ certificates: z.number().int(), crls: z.number().int() }).nullable(),
  checks: z.array(z.object({ check: z.string(), passed: z.boolean(), against: z.string(), detail: z.string().optional() })),
  attachments: z.array(
    z.object({
      name: z.string(),
      mime: z.string().nullable(),
      relationship: z.string().nullable(),
      description: z.string().nullable(),
      bytes: z.number().int(),
      sha256: z.string(),
      associated: z.boolean(),
    }),
  ),
});
export type SignatureReport = z.infer<typeof signatureReportSchema>;

/** The institute root CA as the public page offers it for download. */
export const trustAnchorSchema = z.object({
  subject: z.string(),
  sha256Fingerprint: z.string(),
  notBefore: z.string(),
  notAfter: z.string(),
  pemUrl: z.string(),
  derUrl: z.string(),
  crlUrl: z.string(),
  tsaRoots: z.array(z.object({ subject: z.string(), sha256Fingerprint: z.string() })),
});
export type TrustAnchorInfo = z.infer<typeof trustAnchorSchema>;

export const revokeSigningKeySchema = z.object({
  reason: z.string().trim().min(3).max(500),
  /** When the key is known or suspected to have been compromised (RFC 5280 5.3.2 invalidity date); defaults to now. */
  compromisedSince: z.iso.datetime().optional(),
});
export type RevokeSigningKey = z.infer<typeof revokeSigningKeySchema>;
