import { idParamsSchema, pageOf, wholePage } from '../../shared/http';
import { campaignIdParamsSchema, ratioSeriesSchema, seriesPlotSchema, seriesQuerySchema, uploadPreviewSchema, uploadProgressSchema, uploadQuerySchema } from '../../shared/uploads';
import { route } from '../http/route';
import { createUploadsService } from './uploads.service';

/** The text fields of an upload, as columnMappingSchema (shared/uploads.ts) reads them; they come before the file. */
const uploadFormFields: Record<string, Record<string, unknown>> = {
  epochColumn: { type: 'integer', minimum: 1, maximum: 50, description: 'Column (1-based) holding the epoch' },
  epochKind: { type: 'string', enum: ['mjd', 'iso'], description: 'Epoch as MJD (days, UTC) or ISO 8601 UTC' },
  valueColumn: { type: 'integer', minimum: 1, maximum: 50, description: 'Column holding the frequency ratio or the fractional offset' },
  valueKind: { type: 'string', enum: ['ratio', 'offset'], description: 'ratio: R = ν_B/ν_A as a decimal string; offset: y = R/R₀ − 1' },
  flagColumn: { type: 'integer', minimum: 1, maximum: 50, description: 'Optional column with a validity flag (1/0, true/false)' },
  hasHeader: { type: 'boolean', description: 'Optional: the first non-comment line is a header (found by the preview when left out)' },
  delimiter: { type: 'string', enum: [',', ';', 'tab'], description: 'Optional: the delimiter (found by the preview when left out)' },
};

// Routes for ratio-series uploads: preview (first 64 KiB), upload (streamed, one transaction), progress, list, plot data.
export const uploadRoutes = [
  route({
    method: 'post', path: '/api/v1/campaigns/:id/uploads/preview', summary: 'Preview the start of a ratio-series file: delimiter, header, first rows, suggested columns',
    tag: 'uploads', permission: 'campaigns:write', params: campaignIdParamsSchema, multipart: true, response: uploadPreviewSchema,
    handler: ({ actor, params, req, deps }) => createUploadsService(deps).preview(actor, params.id, req),
  }),
  route({
    method: 'post', path: '/api/v1/campaigns/:id/uploads', summary: 'Upload a ratio series (multipart: mapping fields, then the file); ?uploadId= lets the client poll progress',
    tag: 'uploads', permission: 'campaigns:write', params: campaignIdParamsSchema, query: uploadQuerySchema, multipart: true,
    formFields: uploadFormFields, problems: [409, 413],
    response: ratioSeriesSchema, successStatus: 201,
    handler: ({ actor, params, query, req, deps }) => createUploadsService(deps).upload(actor, params.id, req, query.uploadId),
  }),
  route({
    method: 'get', path: '/api/v1/campaigns/:id/uploads', summary: 'Series uploaded to a campaign', tag: 'uploads', permission: 'campaigns:read',
    params: campaignIdParamsSchema, response: pageOf(ratioSeriesSchema),
    handler: async ({ actor, params, deps }) => wholePage(await createUploadsService(deps).list(actor, params.id)),
  }),
  route({
    method: 'get', path: '/api/v1/uploads/:id/progress', summary: 'Progress of an upload in flight (id chosen by the client)', tag: 'uploads', permission: 'campaigns:write',
    params: idParamsSchema, response: uploadProgressSchema,
    handler: async ({ actor, params, deps }) => createUploadsService(deps).progress(actor, params.id),
  }),
  route({
    method: 'get', path: '/api/v1/uploads/:id', summary: 'One uploaded series', tag: 'uploads', permission: 'campaigns:read',
    params: idParamsSchema, response: ratioSeriesSchema,
    handler: ({ actor, params, deps }) => createUploadsService(deps).get(actor, params.id),
  }),
  route({
    method: 'get', path: '/api/v1/uploads/:id/samples.csv', summary: 'The stored samples as CSV: epoch and ratio (or offset) exactly as uploaded, stored MJD and y (float64, exact), valid flag',
    tag: 'uploads', permission: 'campaigns:read', params: idParamsSchema, raw: true,
    handler: ({ actor, params, res, deps }) => createUploadsService(deps).exportSamples(actor, params.id, res),
  }),
  route({
    method: 'get', path: '/api/v1/uploads/:id/series', summary: 'Plot data: min/max of y per time bucket (gaps as nulls)', tag: 'uploads', permission: 'campaigns:read',
    params: idParamsSchema, query: seriesQuerySchema, response: seriesPlotSchema,
    handler: ({ actor, params, query, deps }) => createUploadsService(deps).plot(actor, params.id, query),
  }),
];
