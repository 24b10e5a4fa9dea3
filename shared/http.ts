import { z } from 'zod';

/** RFC 9457 problem details as the API sends them. */
export const problemSchema = z.object({
  type: z.string(),
  title: z.string(),
  status: z.number(),
  detail: z.string(),
  instance: z.string().optional(),
  code: z.string(),
  requestId: z.string().optional(),
  issues: z
    .array(z.object({ path: z.string(), message: z.string(), line: z.number().optional(), column: z.string().optional() }))
    .optional(),
}).passthrough();
export type Problem = z.infer<typeof problemSchema>;

export const pageQuerySchema = z.object({
  page: z.coerce.number().int().min(1).default(1),
  pageSize: z.coerce.number().int().min(1).max(500).default(25),
  order: z.enum(['asc', 'desc']).default('asc'),
  q: z.string().max(200).optional(),
});
export type PageQuery = z.infer<typeof pageQuerySchema>;

/**
 * A list's `sort` parameter: one of the list's own column names (a zod enum). A free string would end up as a key
 * into a lookup table, where names every object inherits (`__proto__`, `constructor`) do harm.
 */
export function sortableBy<const T extends readonly [string, ...string[]]>(fields: T) {
  return z.enum(fields).optional();
}

export function pageOf<T extends z.ZodTypeAny>(item: T) {
  return z.object({ items: z.array(item), total: z.number().int(), page: z.number().int(), pageSize: z.number().int() });
}
export type Page<T> = { items: T[]; total: number; page: number; pageSize: number };
/** A list that is always answered whole (short reference lists) in the same envelope as a paged list. */
export function wholePage<T>(items: T[]): Page<T> {
  return { items, total: items.length, page: 1, pageSize: Math.max(items.length, 1) };
}

export const idParamsSchema = z.object({ id: z.string().uuid() });

/**
 * PATCH bodies: every field optional and no default filled in, so a field the caller leaves out stays unchanged
 * (zod's `.partial()` would still apply the create schema's defaults and overwrite stored values).
 */
export function patchOf<T extends z.ZodRawShape>(schema: z.ZodObject<T>) {
  const shape = Object.fromEntries(
    Object.entries(schema.shape).map(([key, field]) => [key, ((field instanceof z.ZodDefault ? field.unwrap() : field) as z.ZodTypeAny).optional()]),
  );
  return z.object(shape) as unknown as ReturnType<z.ZodObject<T>['partial']>;
}

/** Control characters (line breaks, tabs, escapes) and the Unicode line separators: never part of a name or label. */
const CONTROL_CHARACTERS = /[\p{Cc}\u2028\u2029]/u;
/**
 * A one-line name or label: trimmed, between `min` and `max` characters, and without control characters — a CR/LF
 * in a name breaks CSV rows, log lines, mail headers and PDF layouts downstream.
 */
export function nameText(min: number, max: number) {
  return z.string().trim().min(min).max(max).refine((s) => !CONTROL_CHARACTERS.test(s), 'line breaks, tabs and other control characters are not allowed here');
}
