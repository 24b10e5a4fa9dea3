import { z } from 'zod';
import { idParamsSchema, pageOf, wholePage } from '../../shared/http';
import {
  budgetVersionSchema,
  clockSchema,
  createClockSchema,
  createLinkSchema,
  createSiteSchema,
  crsEntrySchema,
  linkSchema,
  newBudgetVersionSchema,
  quasigeoidGridSchema,
  referenceFrequencyInput,
  referenceFrequencySchema,
  siteListQuery,
  clockListQuery,
  linkListQuery,
  siteSchema,
  updateClockSchema,
  updateLinkSchema,
  updateReferenceFrequencySchema,
  updateSiteSchema,
  uploadQuasigeoidGridSchema,
} from '../../shared/registry';
import { route } from '../http/route';
import { createRegistryService } from './registry.service';
import { createDeploymentsService } from './deployments.service';
import { clockDeploymentsSchema, createDeploymentSchema, deploymentParamsSchema, deploymentSchema, siteClocksSchema, updateDeploymentSchema } from '../../shared/deployments';

// Registry routes: coordinate systems, sites, quasigeoid grids, clocks and budgets, reference frequencies, fibre links.
const svc = (ds: Parameters<typeof createRegistryService>[0]) => createRegistryService(ds);

export const registryRoutes = [
  route({
    method: 'get', path: '/api/v1/crs', summary: 'Coordinate reference systems accepted for site coordinates', tag: 'registry', permission: 'registry:read',
    response: pageOf(crsEntrySchema),
    handler: async ({ actor, deps }) => wholePage(await svc(deps.dataSource).crsList(actor)),
  }),
  // sites
  route({
    method: 'get', path: '/api/v1/sites', summary: 'Sites (paged, sortable, filterable)', tag: 'registry', permission: 'registry:read',
    query: siteListQuery, response: pageOf(siteSchema),
    handler: ({ actor, query, deps }) => svc(deps.dataSource).listSites(actor, query),
  }),
  route({
    method: 'post', path: '/api/v1/sites', summary: 'Register a site (coordinates in any supported CRS)', tag: 'registry', permission: 'registry:write',
    body: createSiteSchema, response: siteSchema, successStatus: 201,
    handler: ({ actor, body, deps }) => svc(deps.dataSource).createSite(actor, body),
  }),
  route({
    method: 'get', path: '/api/v1/sites/:id', summary: 'One site with entered and GRS80 coordinates', tag: 'registry', permission: 'registry:read',
    params: idParamsSchema, response: siteSchema,
    handler: ({ actor, params, deps }) => svc(deps.dataSource).getSite(actor, params.id),
  }),
  route({
    method: 'patch', path: '/api/v1/sites/:id', summary: 'Change a site of your institute', tag: 'registry', permission: 'registry:write',
    params: idParamsSchema, body: updateSiteSchema, response: siteSchema,
    handler: ({ actor, params, body, deps }) => svc(deps.dataSource).updateSite(actor, params.id, body),
  }),
  // quasigeoid grids
  route({
    method: 'get', path: '/api/v1/quasigeoid-grids', summary: 'Quasigeoid grids available for interpolation', tag: 'registry', permission: 'registry:read',
    response: pageOf(quasigeoidGridSchema),
    handler: async ({ actor, deps }) => wholePage(await svc(deps.dataSource).listGrids(actor)),
  }),
  route({
    method: 'post', path: '/api/v1/quasigeoid-grids', summary: 'Upload a quasigeoid grid (text layout of docs/formats/quasigeoid-grid.md)', tag: 'registry', permission: 'references:write',
    body: uploadQuasigeoidGridSchema, response: quasigeoidGridSchema, successStatus: 201,
    handler: ({ actor, body, deps }) => svc(deps.dataSource).uploadGrid(actor, body),
  }),
  // clocks
  route({
    method: 'get', path: '/api/v1/clocks', summary: 'Clocks (paged, sortable, filterable)', tag: 'registry', permission: 'registry:read',
    query: clockListQuery, response: pageOf(clockSchema),
    handler: ({ actor, query, deps }) => svc(deps.dataSource).listClocks(actor, query),
  }),
  route({
    method: 'post', path: '/api/v1/clocks', summary: 'Register a clock with its first budget version', tag: 'registry', permission: 'registry:write',
    body: createClockSchema, response: clockSchema, successStatus: 201,
    handler: ({ actor, body, deps }) => svc(deps.dataSource).createClock(actor, body),
  }),
  route({
    method: 'get', path: '/api/v1/clocks/:id', summary: 'One clock with its current budget', tag: 'registry', permission: 'registry:read',
    params: idParamsSchema, response: clockSchema,
    handler: ({ actor, params, deps }) => svc(deps.dataSource).getClock(actor, params.id),
  }),
  route({
    method: 'patch', path: '/api/v1/clocks/:id', summary: 'Change a clock of your institute', tag: 'registry', permission: 'registry:write',
    params: idParamsSchema, body: updateClockSchema, response: clockSchema,
    handler: ({ actor, params, body, deps }) => svc(deps.dataSource).updateClock(actor, params.id, body),
  }),
  route({
    method: 'get', path: '/api/v1/clocks/:id/budget-versions', summary: 'All budget versions of a clock, newest first', tag: 'registry', permission: 'registry:read',
    params: idParamsSchema, response: pageOf(budgetVersionSchema),
    handler: async ({ actor, params, deps }) => wholePage(await svc(deps.dataSource).listBudgetVersions(actor, params.id)),
  }),
  route({
    method: 'post', path: '/api/v1/clocks/:id/budget-versions', summary: 'Save a changed budget as a new immutable version', tag: 'registry', permission: 'registry:write',
    params: idParamsSchema, body: newBudgetVersionSchema, response: budgetVersionSchema, successStatus: 201,
    handler: ({ actor, params, body, deps }) => svc(deps.dataSource).addBudgetVersion(actor, params.id, body),
  }),
  // deployments of transportable clocks
  route({
    method: 'get', path: '/api/v1/clocks/:id/deployments', summary: 'Where a clock stood and when (its deployments, oldest first)', tag: 'registry', permission: 'registry:read',
    params: idParamsSchema, response: clockDeploymentsSchema,
    handler: ({ actor, params, deps }) => createDeploymentsService(deps.dataSource).list(actor, params.id),
  }),
  route({
    method: 'post', path: '/api/v1/clocks/:id/deployments', summary: 'Record a deployment of a transportable clock of your institute (no overlaps)', tag: 'registry', permission: 'registry:write',
    params: idParamsSchema, body: createDeploymentSchema, response: deploymentSchema, successStatus: 201,
    handler: ({ actor, params, body, deps }) => createDeploymentsService(deps.dataSource).create(actor, params.id, body),
  }),
  route({
    method: 'patch', path: '/api/v1/clocks/:id/deployments/:deploymentId', summary: 'Change a deployment (site, arrival, departure, note)', tag: 'registry', permission: 'registry:write',
    params: deploymentParamsSchema, body: updateDeploymentSchema, response: deploymentSchema,
    handler: ({ actor, params, body, deps }) => createDeploymentsService(deps.dataSource).update(actor, params.id, params.deploymentId, body),
  }),
  route({
    method: 'delete', path: '/api/v1/clocks/:id/deployments/:deploymentId', summary: 'Remove a deployment no budget version was evaluated for', tag: 'registry', permission: 'registry:write',
    params: deploymentParamsSchema, response: z.object({ deleted: z.literal(true) }),
    handler: ({ actor, params, deps }) => createDeploymentsService(deps.dataSource).remove(actor, params.id, params.deploymentId),
  }),
  route({
    method: 'get', path: '/api/v1/sites/:id/clocks', summary: 'Clocks that stood at a site, with their arrival and departure', tag: 'registry', permission: 'registry:read',
    params: idParamsSchema, response: pageOf(siteClocksSchema.element),
    handler: async ({ actor, params, deps }) => wholePage(await createDeploymentsService(deps.dataSource).atSite(actor, params.id)),
  }),
  // reference frequencies
  route({
    method: 'get', path: '/api/v1/reference-frequencies', summary: 'Reference frequencies used for default reference ratios', tag: 'registry', permission: 'registry:read',
    response: pageOf(referenceFrequencySchema),
    handler: async ({ actor, deps }) => wholePage(await svc(deps.dataSource).listReferences(actor)),
  }),
  route({
    method: 'post', path: '/api/v1/reference-frequencies', summary: 'Add a reference frequency', tag: 'registry', permission: 'references:write',
    body: referenceFrequencyInput, response: referenceFrequencySchema, successStatus: 201,
    handler: ({ actor, body, deps }) => svc(deps.dataSource).createReference(actor, body),
  }),
  route({
    method: 'patch', path: '/api/v1/reference-frequencies/:id', summary: 'Change a reference frequency', tag: 'registry', permission: 'references:write',
    params: idParamsSchema, body: updateReferenceFrequencySchema, response: referenceFrequencySchema,
    handler: ({ actor, params, body, deps }) => svc(deps.dataSource).updateReference(actor, params.id, body),
  }),
  // fibre links
  route({
    method: 'get', path: '/api/v1/links', summary: 'Fibre links with geodesic and chord distances', tag: 'registry', permission: 'registry:read',
    query: linkListQuery, response: pageOf(linkSchema),
    handler: ({ actor, query, deps }) => svc(deps.dataSource).listLinks(actor, query),
  }),
  route({
    method: 'post', path: '/api/v1/links', summary: 'Register a fibre link between two sites', tag: 'registry', permission: 'registry:write',
    body: createLinkSchema, response: linkSchema, successStatus: 201,
    handler: ({ actor, body, deps }) => svc(deps.dataSource).createLink(actor, body),
  }),
  route({
    method: 'get', path: '/api/v1/links/:id', summary: 'One fibre link', tag: 'registry', permission: 'registry:read',
    params: idParamsSchema, response: linkSchema,
    handler: ({ actor, params, deps }) => svc(deps.dataSource).getLink(actor, params.id),
  }),
  route({
    method: 'patch', path: '/api/v1/links/:id', summary: 'Change a fibre link reaching one of your sites', tag: 'registry', permission: 'registry:write',
    params: idParamsSchema, body: updateLinkSchema, response: linkSchema,
    handler: ({ actor, params, body, deps }) => svc(deps.dataSource).updateLink(actor, params.id, body),
  }),
];
