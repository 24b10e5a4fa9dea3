import { jobProgressSchema } from '../../shared/jobs';
import { idParamsSchema, pageOf, pageQuerySchema, wholePage } from '../../shared/http';
import {
  adjustmentOptionsSchema, adjustmentRunDetailSchema, adjustmentRunSchema, benchmarkInputSchema, benchmarkListQuerySchema, benchmarkSchema,
  heightDatumInputSchema, heightDatumSchema, loopReportSchema, loopsQuerySchema, networkMapSchema, reconciliationSchema, sectionInputSchema,
  sectionListQuerySchema, sectionSchema, sectionUploadQuerySchema, sectionUploadResultSchema,
} from '../../shared/network';
import { route } from '../http/route';
import { authorize } from '../auth/permissions';
import { enqueueAdjustment } from '../jobs/queue';
import { createAdjustmentService } from './adjustment.service';
import { createNetworkService } from './network.service';
import { readSectionsUpload, uploadSections } from './sections-upload';

// The levelling network: datums, benchmarks, sections (and their CSV upload), loops, adjustment runs, reconciliation, map.
export const networkRoutes = [
  route({
    method: 'get', path: '/api/v1/network/datums', summary: 'Height datums', tag: 'network', permission: 'network:read',
    response: pageOf(heightDatumSchema),
    handler: async ({ actor, deps }) => wholePage(await createNetworkService(deps.dataSource).listDatums(actor)),
  }),
  route({
    method: 'post', path: '/api/v1/network/datums', summary: 'Define a height datum', tag: 'network', permission: 'network:write',
    body: heightDatumInputSchema, response: heightDatumSchema, successStatus: 201,
    handler: ({ actor, body, deps }) => createNetworkService(deps.dataSource).createDatum(actor, body),
  }),
  route({
    method: 'put', path: '/api/v1/network/datums/:id', summary: 'Change a height datum', tag: 'network', permission: 'network:write',
    params: idParamsSchema, body: heightDatumInputSchema, response: heightDatumSchema,
    handler: ({ actor, params, body, deps }) => createNetworkService(deps.dataSource).updateDatum(actor, params.id, body),
  }),
  route({
    method: 'get', path: '/api/v1/network/benchmarks', summary: 'Benchmarks (paged, sortable, filterable)', tag: 'network', permission: 'network:read',
    query: benchmarkListQuerySchema, response: pageOf(benchmarkSchema),
    handler: ({ actor, query, deps }) => createNetworkService(deps.dataSource).listBenchmarks(actor, query),
  }),
  route({
    method: 'get', path: '/api/v1/network/benchmarks/:id', summary: 'One benchmark', tag: 'network', permission: 'network:read',
    params: idParamsSchema, response: benchmarkSchema,
    handler: ({ actor, params, deps }) => createNetworkService(deps.dataSource).getBenchmark(actor, params.id),
  }),
  route({
    method: 'post', path: '/api/v1/network/benchmarks', summary: 'Register a benchmark', tag: 'network', permission: 'network:write',
    body: benchmarkInputSchema, response: benchmarkSchema, successStatus: 201,
    handler: ({ actor, body, deps }) => createNetworkService(deps.dataSource).createBenchmark(actor, body),
  }),
  route({
    method: 'put', path: '/api/v1/network/benchmarks/:id', summary: 'Change a benchmark (including marking it destroyed)', tag: 'network', permission: 'network:write',
    params: idParamsSchema, body: benchmarkInputSchema, response: benchmarkSchema,
    handler: ({ actor, params, body, deps }) => createNetworkService(deps.dataSource).updateBenchmark(actor, params.id, body),
  }),
  route({
    method: 'get', path: '/api/v1/network/sections', summary: 'Levelling sections (paged, sortable, filterable)', tag: 'network', permission: 'network:read',
    query: sectionListQuerySchema, response: pageOf(sectionSchema),
    handler: ({ actor, query, deps }) => createNetworkService(deps.dataSource).listSections(actor, query),
  }),
  route({
    method: 'post', path: '/api/v1/network/sections', summary: 'Add a levelling section', tag: 'network', permission: 'network:write',
    body: sectionInputSchema, response: sectionSchema, successStatus: 201,
    handler: ({ actor, body, deps }) => createNetworkService(deps.dataSource).createSection(actor, body),
  }),
  route({
    method: 'put', path: '/api/v1/network/sections/:id', summary: 'Correct a levelling section', tag: 'network', permission: 'network:write',
    params: idParamsSchema, body: sectionInputSchema, response: sectionSchema,
    handler: ({ actor, params, body, deps }) => createNetworkService(deps.dataSource).updateSection(actor, params.id, body),
  }),
  route({
    method: 'delete', path: '/api/v1/network/sections/:id', summary: 'Remove a levelling section', tag: 'network', permission: 'network:write',
    params: idParamsSchema,
    handler: async ({ actor, params, deps }) => {
      await createNetworkService(deps.dataSource).deleteSection(actor, params.id);
      return undefined;
    },
  }),
  route({
    method: 'post', path: '/api/v1/network/sections/upload', summary: 'Upload levelling sections as CSV (preview=true checks without storing)', tag: 'network',
    permission: 'network:write', multipart: true, raw: true, query: sectionUploadQuerySchema, response: sectionUploadResultSchema,
    handler: async ({ actor, query, req, res, deps }) => {
      authorize(actor, 'network:write');
      const file = await readSectionsUpload(req, { fileBytes: deps.config.upload.sectionsLimitBytes, maxLineChars: deps.config.upload.maxLineBytes });
      const out = await uploadSections(deps.dataSource, actor, file, query.preview === 'true');
      res.status(out.stored ? 201 : 200).json(out);
    },
  }),
  route({
    method: 'get', path: '/api/v1/network/loops', summary: 'Loop misclosures against the tolerance t·√L (t: tolerance coefficient, mm/√km)', tag: 'network', permission: 'network:read',
    query: loopsQuerySchema, response: loopReportSchema,
    handler: ({ actor, query, deps }) => createNetworkService(deps.dataSource).loops(actor, query.datumId),
  }),
  route({
    method: 'get', path: '/api/v1/network/runs', summary: 'Adjustment runs, newest first', tag: 'network', permission: 'network:read',
    query: pageQuerySchema, response: pageOf(adjustmentRunSchema),
    handler: ({ actor, query, deps }) => createAdjustmentService(deps.dataSource).listRuns(actor, query),
  }),
  route({
    method: 'post', path: '/api/v1/network/runs', summary: 'Start an adjustment run (queued; answers 202 with the run)', tag: 'network', permission: 'network:write',
    body: adjustmentOptionsSchema, response: adjustmentRunSchema, successStatus: 202,
    handler: ({ actor, body, deps }) => createAdjustmentService(deps.dataSource).createRun(actor, body, (id) => enqueueAdjustment(deps.config.databaseUrl, id)),
  }),
  route({
    method: 'get', path: '/api/v1/network/runs/:id', summary: 'One adjustment run with its progress and results', tag: 'network', permission: 'network:read',
    params: idParamsSchema, response: adjustmentRunDetailSchema,
    handler: ({ actor, params, deps }) => createAdjustmentService(deps.dataSource).getRun(actor, params.id),
  }),
  route({
    method: 'get', path: '/api/v1/network/runs/:id/progress', summary: 'How far an adjustment run got (stage, fraction)', tag: 'network', permission: 'network:read',
    params: idParamsSchema, response: jobProgressSchema,
    handler: ({ actor, params, deps }) => createAdjustmentService(deps.dataSource).runProgress(actor, params.id),
  }),
  route({
    method: 'get', path: '/api/v1/network/reconciliation', summary: 'Clock-derived against levelled potential differences (Eₙ)', tag: 'network', permission: 'network:read',
    response: reconciliationSchema,
    handler: ({ actor, deps }) => createAdjustmentService(deps.dataSource).reconciliation(actor),
  }),
  route({
    method: 'get', path: '/api/v1/network/map', summary: 'Benchmarks, sections, sites and links for the map', tag: 'network', permission: 'network:read',
    response: networkMapSchema,
    handler: ({ actor, deps }) => createAdjustmentService(deps.dataSource).map(actor),
  }),
];
