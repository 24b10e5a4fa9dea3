import { z } from 'zod';

// The administrator's view of the mail outbox: every queued message by state, and a retry for dead letters.
export const mailStateSchema = z.enum(['pending', 'sent', 'dead']);
export type MailState = z.infer<typeof mailStateSchema>;

export const mailOutboxQuerySchema = z.object({
  state: mailStateSchema.default('dead'),
  page: z.coerce.number().int().min(1).default(1),
  pageSize: z.coerce.number().int().min(1).max(200).default(25),
});

export const mailOutboxItemSchema = z.object({
  id: z.string().uuid(),
  state: mailStateSchema,
  to: z.string(),
  subject: z.string(),
  createdAt: z.string(),
  attempts: z.number().int(),
  lastError: z.string().nullable(),
  nextAttemptAt: z.string().nullable(),
  sentAt: z.string().nullable(),
  deadAt: z.string().nullable(),
  messageId: z.string().nullable(),
});
export type MailOutboxItem = z.infer<typeof mailOutboxItemSchema>;

export const mailOutboxPageSchema = z.object({
  items: z.array(mailOutboxItemSchema),
  total: z.number().int(),
  page: z.number().int(),
  pageSize: z.number().int(),
  counts: z.object({ pending: z.number().int(), sent: z.number().int(), dead: z.number().int() }),
});
export type MailOutboxPage = z.infer<typeof mailOutboxPageSchema>;
