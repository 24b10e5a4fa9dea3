import { CalibrationChainEntity, CampaignEntity, ClockEntity } from '../server/db/entities/registry.entities';
import type { Seeder } from './demo';

// The invented demo chain: the coordinating institute's transportable Sr clock calibrated side by side at the coastal
// lab before and after its stay at the (invented) Harbour Light tide gauge. Seeded only when the three campaigns exist.
export const DEMO_CHAIN_NAME = 'NGCO-TSr1 Harbour Light chain (April–June 2026)';
export const DEMO_CHAIN_CAMPAIGNS = {
  before: 'NGCO-TSr1 side by side at SCL, before transport (April 2026)',
  remote: 'NGCO-TSr1 remote at Harbour Light tide gauge (May 2026)',
  after: 'NGCO-TSr1 side by side at SCL, after transport (June 2026)',
} as const;

export const chainsSeeder: Seeder = {
  name: 'calibration chains',
  async run({ manager }) {
    const campaigns = manager.getRepository(CampaignEntity);
    const find = (name: string) => campaigns.findOne({ where: { name } });
    // one after the other: the seed runs in one transaction, on one connection, which takes one query at a time
    const before = await find(DEMO_CHAIN_CAMPAIGNS.before);
    const remote = await find(DEMO_CHAIN_CAMPAIGNS.remote);
    const after = await find(DEMO_CHAIN_CAMPAIGNS.after);
    const T = await manager.getRepository(ClockEntity).findOne({ where: { name: 'NGCO-TSr1' } });
    if (!before || !remote || !after || !T) return;
    const referenceClockId = before.clockAId === T.id ? before.clockBId : before.clockAId;
    await manager.getRepository(CalibrationChainEntity).save({
      name: DEMO_CHAIN_NAME, instituteId: T.instituteId, transportableClockId: T.id, referenceClockId,
      remoteCampaignId: remote.id, beforeCampaignId: before.id, afterCampaignId: after.id,
      transportReproducibility: null, transportReproducibilitySource: null,
      notes: 'Transport reproducibility from the before/after difference (the two calibrations differ slightly).',
      createdByUserId: null, createdBy: 'demo seed',
    });
  },
};
