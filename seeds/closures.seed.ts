import { recordAudit } from '../server/audit/audit.service';
import { recomputeClosures } from '../server/closures/closures.service';
import type { Seeder } from './demo';

// Closures of the invented demo's loops (SCL-Sr1 → HMO-Sr2 → HMO-YbIon in October 2026), computed from the seeded
// series by the same code the closure job runs.
export const closuresSeeder: Seeder = {
  name: 'ratio closures (invented)',
  run: async ({ manager }) => {
    const done = await recomputeClosures(manager, { now: new Date('2026-11-03T09:30:00Z') });
    await recordAudit(manager, null, { action: 'demo.closures-seeded', entityType: 'database', details: { loops: done.loops, computed: done.computed } });
  },
};
