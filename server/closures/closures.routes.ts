import { closureDetailSchema, closureListQuerySchema, closureSummarySchema } from '../../shared/closures';
import { idParamsSchema, pageOf, wholePage } from '../../shared/http';
import { route } from '../http/route';
import { createClosuresService } from './closures.service';

// Clock-ratio closures (read only: the 'closure-compute' job stores them). Scoped: a closure is visible when every campaign of its loop is.
export const closureRoutes = [
  route({
    method: 'get', path: '/api/v1/network/closures', summary: 'Clock-ratio closures of simultaneous campaigns (paged; failing=true for |Eₙ| > 1)', tag: 'network', permission: 'network:read',
    query: closureListQuerySchema, response: pageOf(closureSummarySchema),
    handler: ({ actor, query, deps }) => createClosuresService(deps.dataSource).list(actor, query),
  }),
  route({
    method: 'get', path: '/api/v1/network/closures.csv', summary: 'Clock-ratio closures as CSV (dimensionless, with u, U, k, p and Eₙ)', tag: 'network', permission: 'network:read', raw: true,
    handler: async ({ actor, deps, res }) => {
      const csv = await createClosuresService(deps.dataSource).listCsv(actor);
      res.status(200).type('text/csv; charset=utf-8').attachment('ratio-closures.csv').send(csv);
    },
  }),
  route({
    method: 'get', path: '/api/v1/network/closures/:id', summary: 'One clock-ratio closure with its legs, budget and method', tag: 'network', permission: 'network:read',
    params: idParamsSchema, response: closureDetailSchema,
    handler: ({ actor, params, deps }) => createClosuresService(deps.dataSource).detail(actor, params.id),
  }),
  route({
    method: 'get', path: '/api/v1/network/closures/:id/export.csv', summary: 'One clock-ratio closure as CSV with units', tag: 'network', permission: 'network:read', params: idParamsSchema, raw: true,
    handler: async ({ actor, params, deps, res }) => {
      const csv = await createClosuresService(deps.dataSource).exportCsv(actor, params.id);
      res.status(200).type('text/csv; charset=utf-8').attachment(`closure-${params.id}.csv`).send(csv);
    },
  }),
  route({
    method: 'get', path: '/api/v1/network/closures/:id/export.json', summary: 'One clock-ratio closure as a JSON download (dimensionless quantities, times in UTC)', tag: 'network', permission: 'network:read',
    params: idParamsSchema, raw: true,
    handler: async ({ actor, params, deps, res }) => {
      const d = await createClosuresService(deps.dataSource).detail(actor, params.id);
      res.status(200).type('application/json').attachment(`closure-${params.id}.json`).send(JSON.stringify({ units: { closure: '1 (dimensionless)', uncertainties: '1 (dimensionless)', tau0Seconds: 's', times: 'UTC, ISO 8601' }, ...d }, null, 1));
    },
  }),
  route({
    method: 'get', path: '/api/v1/campaigns/:id/closures', summary: 'The clock-ratio closures a campaign is part of', tag: 'campaigns', permission: 'campaigns:read',
    params: idParamsSchema, response: pageOf(closureSummarySchema),
    handler: async ({ actor, params, deps }) => wholePage(await createClosuresService(deps.dataSource).forCampaign(actor, params.id)),
  }),
];
