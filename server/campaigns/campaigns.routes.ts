import { z } from 'zod';
import {
  acceptCampaignSchema,
  checklistTickSchema,
  campaignListQuery,
  campaignSchema,
  campaignSummarySchema,
  createCampaignSchema,
  defaultRatioQuery,
  returnCampaignSchema,
  transitionNoteSchema,
  updateCampaignSchema,
} from '../../shared/campaigns';
import { auditEventSchema } from '../../shared/auth';
import { idParamsSchema, pageOf } from '../../shared/http';
import { campaignAuditTrail } from './campaign-audit';
import type { AppDeps } from '../deps';
import { route } from '../http/route';
import { createCampaignsService } from './campaigns.service';

// Campaign routes: list, read, create, change while editable, and the review state changes.
const svc = (deps: AppDeps) => createCampaignsService({ dataSource: deps.dataSource, config: deps.config });

export const campaignRoutes = [
  route({
    method: 'get', path: '/api/v1/campaigns', summary: 'Campaigns you may see (paged, sortable, filterable by state)', tag: 'campaigns', permission: 'campaigns:read',
    query: campaignListQuery, response: pageOf(campaignSummarySchema),
    handler: ({ actor, query, deps }) => svc(deps).list(actor, query),
  }),
  route({
    method: 'get', path: '/api/v1/campaigns/default-reference-ratio', summary: 'The default reference ratio ν_B/ν_A for two clocks', tag: 'campaigns', permission: 'campaigns:read',
    query: defaultRatioQuery, response: z.object({ value: z.string(), relativeUncertainty: z.number(), source: z.string() }),
    handler: ({ actor, query, deps }) => svc(deps).defaultRatio(actor, query.clockAId, query.clockBId),
  }),
  route({
    method: 'post', path: '/api/v1/campaigns', summary: 'Open a campaign (draft) between two clocks over one fibre link', tag: 'campaigns', permission: 'campaigns:write',
    body: createCampaignSchema, response: campaignSchema, successStatus: 201,
    handler: ({ actor, body, deps }) => svc(deps).create(actor, body),
  }),
  route({
    method: 'get', path: '/api/v1/campaigns/:id', summary: 'One campaign with its timeline', tag: 'campaigns', permission: 'campaigns:read',
    params: idParamsSchema, response: campaignSchema,
    handler: ({ actor, params, deps }) => svc(deps).get(actor, params.id),
  }),
  route({
    method: 'patch', path: '/api/v1/campaigns/:id', summary: 'Change a draft or returned campaign of your institute', tag: 'campaigns', permission: 'campaigns:write',
    params: idParamsSchema, body: updateCampaignSchema, response: campaignSchema,
    handler: ({ actor, params, body, deps }) => svc(deps).update(actor, params.id, body),
  }),
  route({
    method: 'post', path: '/api/v1/campaigns/:id/submit', summary: 'Submit for review (mails the coordinating institute)', tag: 'campaigns', permission: 'campaigns:write',
    params: idParamsSchema, body: transitionNoteSchema, response: campaignSchema,
    handler: ({ actor, params, body, deps }) => svc(deps).submit(actor, params.id, body.note),
  }),
  route({
    method: 'post', path: '/api/v1/campaigns/:id/start-review', summary: 'Start reviewing a submitted campaign', tag: 'campaigns', permission: 'campaigns:review',
    params: idParamsSchema, body: transitionNoteSchema, response: campaignSchema,
    handler: ({ actor, params, body, deps }) => svc(deps).startReview(actor, params.id, body.note),
  }),
  route({
    method: 'post', path: '/api/v1/campaigns/:id/accept',
    summary: 'Accept a campaign under review (comment required; a justification when Eₙ, uptime or the result ask for one)', tag: 'campaigns', permission: 'campaigns:review',
    params: idParamsSchema, body: acceptCampaignSchema, response: campaignSchema,
    handler: ({ actor, params, body, deps }) => svc(deps).accept(actor, params.id, body),
  }),
  route({
    method: 'post', path: '/api/v1/campaigns/:id/return', summary: 'Return a campaign to the lab with a reason', tag: 'campaigns', permission: 'campaigns:review',
    params: idParamsSchema, body: returnCampaignSchema, response: campaignSchema,
    handler: ({ actor, params, body, deps }) => svc(deps).returnToLab(actor, params.id, body.reason),
  }),
  route({
    method: 'post', path: '/api/v1/campaigns/:id/checklist', summary: 'Tick or untick one item of the reviewer’s checklist (audited)', tag: 'campaigns', permission: 'campaigns:review',
    params: idParamsSchema, body: checklistTickSchema, response: campaignSchema,
    handler: ({ actor, params, body, deps }) => svc(deps).tick(actor, params.id, body.item, body.checked),
  }),
  route({
    method: 'get', path: '/api/v1/campaigns/:id/audit-trail', summary: 'Every audit event of a campaign, its uploads and certificates, oldest first, numbered', tag: 'audit', permission: 'audit:read',
    params: idParamsSchema, response: pageOf(auditEventSchema.extend({ seq: z.number().int() })),
    handler: ({ actor, params, deps }) => campaignAuditTrail(deps.dataSource, actor, params.id),
  }),
];
