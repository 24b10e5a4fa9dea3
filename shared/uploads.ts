import { z } from 'zod';

// Contract for uploads of frequency-ratio time series (docs/formats/ratio-series.md describes the file layout).

export const epochKinds = ['mjd', 'iso'] as const;
export const valueKinds = ['ratio', 'offset'] as const;
export const delimiters = [',', ';', '\t'] as const;

/** How the columns of a file are read; sent as multipart form fields before the file part. Columns count from 1. */
export const columnMappingSchema = z.object({
  epochColumn: z.coerce.number().int().min(1).max(50),
  epochKind: z.enum(epochKinds),
  valueColumn: z.coerce.number().int().min(1).max(50),
  valueKind: z.enum(valueKinds),
  flagColumn: z.preprocess((v) => (v === '' || v === undefined || v === null ? undefined : v), z.coerce.number().int().min(1).max(50).optional()),
  hasHeader: z.preprocess((v) => (v === undefined || v === '' ? undefined : v === true || v === 'true' || v === '1'), z.boolean().optional()),
  delimiter: z.preprocess((v) => (v === 'tab' ? '\t' : v === '' ? undefined : v), z.enum(delimiters).optional()),
}).refine((m) => m.epochColumn !== m.valueColumn, { message: 'epoch and value must be different columns', path: ['valueColumn'] })
  .refine((m) => m.flagColumn === undefined || (m.flagColumn !== m.epochColumn && m.flagColumn !== m.valueColumn), { message: 'the flag column must differ from the epoch and value columns', path: ['flagColumn'] });
export type ColumnMapping = z.infer<typeof columnMappingSchema>;

export const uploadPreviewSchema = z.object({
  fileName: z.string(),
  bytesRead: z.number().int(),
  delimiter: z.enum(delimiters),
  hasHeader: z.boolean(),
  header: z.array(z.string()).nullable(),
  columnCount: z.number().int(),
  /** First data rows (up to 20) as the parser split them, with their line numbers in the file. */
  rows: z.array(z.object({ line: z.number().int(), cells: z.array(z.string()) })),
  suggested: z.object({
    epochColumn: z.number().int(),
    epochKind: z.enum(epochKinds),
    valueColumn: z.number().int(),
    valueKind: z.enum(valueKinds),
    flagColumn: z.number().int().nullable(),
  }).nullable(),
  notes: z.array(z.string()),
});
export type UploadPreview = z.infer<typeof uploadPreviewSchema>;

export const ratioSeriesSchema = z.object({
  id: z.string().uuid(),
  campaignId: z.string().uuid(),
  fileName: z.string(),
  sha256: z.string(),
  byteSize: z.number().int(),
  rowCount: z.number().int(),
  validCount: z.number().int(),
  firstMjd: z.number(),
  lastMjd: z.number(),
  uptimeFraction: z.number(),
  tau0Seconds: z.number(),
  mapping: z.record(z.string(), z.unknown()),
  invented: z.boolean(),
  createdBy: z.string().nullable(),
  createdAt: z.string(),
});
export type RatioSeries = z.infer<typeof ratioSeriesSchema>;

export const uploadProgressSchema = z.object({
  uploadId: z.string().uuid(),
  phase: z.enum(['receiving', 'storing', 'done', 'failed']),
  bytesRead: z.number().int(),
  bytesExpected: z.number().int().nullable(),
  rowsProcessed: z.number().int(),
  seriesId: z.string().uuid().nullable(),
});
export type UploadProgress = z.infer<typeof uploadProgressSchema>;

export const uploadQuerySchema = z.object({ uploadId: z.string().uuid().optional() });
export const campaignIdParamsSchema = z.object({ id: z.string().uuid() });

export const seriesQuerySchema = z.object({
  points: z.coerce.number().int().min(10).max(20_000).default(2000),
  fromMjd: z.coerce.number().optional(),
  toMjd: z.coerce.number().optional(),
});

/** One time bucket of the decimated series: extremes of the valid samples, or nulls where there are none (a gap). */
export const seriesBucketSchema = z.object({
  mjd: z.number(),
  min: z.number().nullable(),
  max: z.number().nullable(),
  count: z.number().int(),
  /** Mean and sample standard deviation of the valid y in the bucket (sd null below two samples). */
  mean: z.number().nullable(),
  sd: z.number().nullable(),
});
export const seriesPlotSchema = z.object({
  seriesId: z.string().uuid(),
  fromMjd: z.number(),
  toMjd: z.number(),
  bucketDays: z.number(),
  sampleCount: z.number().int(),
  /** y is the dimensionless fractional frequency offset. */
  unit: z.literal('1'),
  /** The whole stored span, so a zoomed plot can offer the way back. */
  firstMjd: z.number(),
  lastMjd: z.number(),
  buckets: z.array(seriesBucketSchema),
});
export type SeriesPlot = z.infer<typeof seriesPlotSchema>;
export type SeriesBucket = z.infer<typeof seriesBucketSchema>;
