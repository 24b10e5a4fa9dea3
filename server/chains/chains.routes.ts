import { chainCandidatesSchema, chainListQuery, chainResultSchema, chainSchema, createChainSchema, updateChainSchema } from '../../shared/chains';
import { idParamsSchema, pageOf } from '../../shared/http';
import type { AppDeps } from '../deps';
import { route } from '../http/route';
import { createChainsService } from './chains.service';

// Calibration chains: list, read, result, exports, and create / change / delete (coordinator, T's institute).
const svc = (deps: AppDeps) => createChainsService(deps.dataSource);

export const chainRoutes = [
  route({
    method: 'get', path: '/api/v1/chains', summary: 'Calibration chains you may see (every campaign of the chain visible to you; paged)', tag: 'chains', permission: 'campaigns:read',
    query: chainListQuery, response: pageOf(chainSchema),
    handler: ({ actor, query, deps }) => svc(deps).list(actor, query),
  }),
  route({
    method: 'post', path: '/api/v1/chains', summary: 'Create a calibration chain of a transportable clock (coordinator, or the clock’s institute)', tag: 'chains', permission: 'chains:write',
    body: createChainSchema, response: chainSchema, successStatus: 201, problems: [409],
    handler: ({ actor, body, deps }) => svc(deps).create(actor, body),
  }),
  route({
    method: 'get', path: '/api/v1/chains/candidates', summary: 'Transportable clocks and their campaigns you may see, for building a chain', tag: 'chains', permission: 'campaigns:read',
    response: chainCandidatesSchema,
    handler: ({ actor, deps }) => svc(deps).candidates(actor),
  }),
  route({
    method: 'get', path: '/api/v1/chains/:id', summary: 'One calibration chain', tag: 'chains', permission: 'campaigns:read',
    params: idParamsSchema, response: chainSchema,
    handler: ({ actor, params, deps }) => svc(deps).get(actor, params.id),
  }),
  route({
    method: 'patch', path: '/api/v1/chains/:id', summary: 'Change a calibration chain', tag: 'chains', permission: 'chains:write',
    params: idParamsSchema, body: updateChainSchema, response: chainSchema, problems: [409],
    handler: ({ actor, params, body, deps }) => svc(deps).update(actor, params.id, body),
  }),
  route({
    method: 'delete', path: '/api/v1/chains/:id', summary: 'Delete a calibration chain (its campaigns stay; refused once it has a certificate)', tag: 'chains', permission: 'chains:write', problems: [409],
    params: idParamsSchema, successStatus: 204,
    handler: async ({ actor, params, deps }) => { await svc(deps).remove(actor, params.id); },
  }),
  route({
    method: 'get', path: '/api/v1/chains/:id/result', summary: 'The chain’s ΔC with its GUM budget, k, p, the before/after check (computed from the campaigns’ results)', tag: 'chains', permission: 'campaigns:read',
    params: idParamsSchema, response: chainResultSchema,
    handler: ({ actor, params, deps }) => svc(deps).result(actor, params.id),
  }),
  route({
    method: 'get', path: '/api/v1/chains/:id/result.csv', summary: 'The chain result as CSV (units in a column)', tag: 'chains', permission: 'campaigns:read',
    params: idParamsSchema, raw: true,
    handler: async ({ actor, params, deps, res }) => {
      const csv = await svc(deps).csv(actor, params.id);
      res.status(200).type('text/csv; charset=utf-8').attachment(`chain-${params.id}.csv`).send(csv);
    },
  }),
  route({
    method: 'get', path: '/api/v1/chains/:id/result.json', summary: 'The chain result as a JSON download (units in the field names and unit fields)', tag: 'chains', permission: 'campaigns:read',
    params: idParamsSchema, raw: true,
    handler: async ({ actor, params, deps, res }) => {
      const r = await svc(deps).result(actor, params.id);
      res.status(200).type('application/json; charset=utf-8').attachment(`chain-${params.id}.json`).send(JSON.stringify(r, null, 2));
    },
  }),
];
