import { idParamsSchema } from '../../shared/http';
import { comparisonResultSchema } from '../../shared/results';
import { route } from '../http/route';
import { createResultsService } from './results.service';

// Campaign result: current (recomputed when its inputs changed), forced recomputation, CSV export.
export const resultsRoutes = [
  route({
    method: 'get', path: '/api/v1/campaigns/:id/result', summary: 'The campaign’s comparison result (recomputed when its inputs changed)', tag: 'results',
    permission: 'campaigns:read', params: idParamsSchema, response: comparisonResultSchema,
    handler: ({ actor, params, deps }) => createResultsService(deps.dataSource).get(actor, params.id),
  }),
  route({
    method: 'post', path: '/api/v1/campaigns/:id/result/recompute', summary: 'Recompute the campaign’s comparison result now', tag: 'results',
    permission: 'results:recompute', params: idParamsSchema, response: comparisonResultSchema, successStatus: 201,
    handler: ({ actor, params, deps }) => createResultsService(deps.dataSource).recompute(actor, params.id),
  }),
  route({
    method: 'get', path: '/api/v1/campaigns/:id/result.csv', summary: 'The comparison result as CSV', tag: 'results',
    permission: 'campaigns:read', params: idParamsSchema, raw: true,
    handler: async ({ actor, params, deps, res }) => {
      const csv = await createResultsService(deps.dataSource).csv(actor, params.id);
      res.status(200).type('text/csv; charset=utf-8').attachment(`result-${params.id}.csv`).send(csv);
    },
  }),
];
