import { z } from 'zod';

// Durable progress of work done by workers (result computation, certificate issue, adjustment runs), as the
// progress routes answer it. `fraction` is 0..1; `stage` is a sentence for people.

export const jobStateSchema = z.enum(['not-requested', 'queued', 'running', 'done', 'failed']);
export type JobState = z.infer<typeof jobStateSchema>;

export const jobProgressSchema = z.object({
  state: jobStateSchema,
  stage: z.string(),
  fraction: z.number().min(0).max(1),
  updatedAt: z.string().nullable(),
  error: z.string().nullable(),
  /** Seconds a client should wait before asking again while the job is open. */
  retryAfterSeconds: z.number().int().nullable(),
});
export type JobProgress = z.infer<typeof jobProgressSchema>;

export const certificateRequestProgressSchema = jobProgressSchema.extend({
  id: z.string().uuid(),
  kind: z.enum(['issue', 'reissue']),
  /** The campaign, or the calibration chain, the certificate is for (one of the two is set). */
  campaignId: z.string().uuid().nullable(),
  chainId: z.string().uuid().nullable(),
  previousNumber: z.string().nullable(),
  requestedAt: z.string(),
  /** The certificate once the request is done (an unchanged result gives the existing certificate: created false). */
  certificateNumber: z.string().nullable(),
  created: z.boolean().nullable(),
});
export type CertificateRequestProgress = z.infer<typeof certificateRequestProgressSchema>;

/** What POST …/certificates and POST …/reissue answer (202), with Location: the progress resource. */
export const certificateRequestAcceptedSchema = z.object({ request: certificateRequestProgressSchema, progressUrl: z.string() });
export type CertificateRequestAccepted = z.infer<typeof certificateRequestAcceptedSchema>;

export const JOB_POLL_SECONDS = 1;
