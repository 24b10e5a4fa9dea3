import { idParamsSchema } from '../../shared/http';
import { jobProgressSchema } from '../../shared/jobs';
import { comparisonResultSchema, resultRequestSchema } from '../../shared/results';
import { route } from '../http/route';
import { createResultsService } from './results.service';

// Campaign result: the stored one for the current inputs (reads only), a queued recomputation, CSV export.
export const resultsRoutes = [
  route({
    method: 'get', path: '/api/v1/campaigns/:id/result', summary: 'The campaign’s stored comparison result for its current inputs (404 result-pending / result-failed / result-not-computed otherwise)', tag: 'results',
    permission: 'campaigns:read', params: idParamsSchema, response: comparisonResultSchema,
    handler: ({ actor, params, deps }) => createResultsService(deps.dataSource, deps.config.databaseUrl).get(actor, params.id),
  }),
  route({
    method: 'get', path: '/api/v1/campaigns/:id/result/progress', summary: 'How far the campaign’s result computation got (stage, fraction; state not-requested when never asked for)', tag: 'results',
    permission: 'campaigns:read', params: idParamsSchema, response: jobProgressSchema,
    handler: ({ actor, params, deps }) => createResultsService(deps.dataSource, deps.config.databaseUrl).progress(actor, params.id),
  }),
  route({
    method: 'post', path: '/api/v1/campaigns/:id/result/recompute', summary: 'Ask for a recomputation of the campaign’s result (202: queued; a worker computes it)', tag: 'results',
    permission: 'results:recompute', params: idParamsSchema, response: resultRequestSchema, successStatus: 202,
    handler: ({ actor, params, deps }) => createResultsService(deps.dataSource, deps.config.databaseUrl).recompute(actor, params.id),
  }),
  route({
    method: 'get', path: '/api/v1/campaigns/:id/result.csv', summary: 'The comparison result as CSV', tag: 'results',
    permission: 'campaigns:read', params: idParamsSchema, raw: true,
    handler: async ({ actor, params, deps, res }) => {
      const csv = await createResultsService(deps.dataSource, deps.config.databaseUrl).csv(actor, params.id);
      res.status(200).type('text/csv; charset=utf-8').attachment(`result-${params.id}.csv`).send(csv);
    },
  }),
];
