import { z } from 'zod';
import { pageOf, pageQuerySchema } from './http';

// The administrator's view of the mail outbox: every queued message by state, and a retry for dead letters.
export const mailStateSchema = z.enum(['pending', 'sent', 'dead']);
export type MailState = z.infer<typeof mailStateSchema>;

export const mailOutboxQuerySchema = pageQuerySchema.pick({ page: true, pageSize: true }).extend({ state: mailStateSchema.default('dead') });

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

export const mailOutboxPageSchema = pageOf(mailOutboxItemSchema).extend({
  counts: z.object({ pending: z.number().int(), sent: z.number().int(), dead: z.number().int() }),
});
export type MailOutboxPage = z.infer<typeof mailOutboxPageSchema>;
