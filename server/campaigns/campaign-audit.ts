import type { DataSource } from 'typeorm';
import type { Actor } from '../auth/actor';
import { canSeeCampaign } from '../auth/campaign-scope';
import { authorize } from '../auth/permissions';
import { toAuditEventDto } from '../audit/audit.service';
import { AuditEventEntity } from '../db/entities/core.entities';
import { CampaignEntity } from '../db/entities/registry.entities';
import { NotFound } from '../http/errors';

// A campaign's whole audit trail: its own events, its uploaded series and its certificates (both name the
// campaign in their details), oldest first. `seq` numbers them 1…n within the campaign, so the reader sees no gaps;
// `id` stays the position in the institution-wide hash chain.

const MAX_EVENTS = 5000;

export async function campaignAuditTrail(dataSource: DataSource, actor: Actor, campaignId: string) {
  authorize(actor, 'audit:read');
  // The same visibility rule as the campaign itself (server/auth/campaign-scope.ts): a campaign the caller may not
  // see has no audit trail for them either.
  const campaign = await dataSource.getRepository(CampaignEntity).findOne({ where: { id: campaignId }, relations: { clockB: true } });
  if (!campaign || !canSeeCampaign(actor, { state: campaign.state, instituteId: campaign.instituteId, partnerInstituteId: campaign.clockB?.instituteId ?? null })) throw new NotFound('Campaign');
  const rows = await dataSource
    .getRepository(AuditEventEntity)
    .createQueryBuilder('a')
    .where(`(a.entity_type = 'campaign' AND a.entity_id = :id) OR a.details->>'campaignId' = :id`, { id: campaignId })
    .orderBy('a.id', 'ASC')
    .take(MAX_EVENTS)
    .getMany();
  const items = rows.map((r, i) => ({ ...toAuditEventDto(r), seq: i + 1 }));
  return { items, total: items.length, page: 1, pageSize: MAX_EVENTS };
}
