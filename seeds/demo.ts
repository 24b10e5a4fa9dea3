import type { DataSource, EntityManager } from 'typeorm';
import { recordAudit } from '../server/audit/audit.service';
import { InstituteEntity, UserEntity } from '../server/db/entities/core.entities';
import { demoInstitutes, demoPeople } from './people';
import { certificatesSeeder } from './certificates.seed';
import { chainsSeeder } from './chains.seed';
import { networkSeeder } from './network.seed';
import { registrySeeder } from './registry.seed';
import { transportSeeder } from './transport.seed';
import { uploadsSeeder } from './uploads.seed';
import { closuresSeeder } from './closures.seed';

// Loads the invented demo scenario into an empty database. Every name, place and number here is made up.
// Feature seeders run after the people, in order; each receives the transaction and the institutes by code.
export type SeedContext = { manager: EntityManager; instituteIds: Record<string, string>; userIds: Record<string, string> };
export type Seeder = { name: string; run: (ctx: SeedContext) => Promise<void> };

export const featureSeeders: Seeder[] = [];

export async function isSeeded(ds: DataSource): Promise<boolean> {
  return (await ds.getRepository(InstituteEntity).count()) > 0;
}

export async function seedDemo(ds: DataSource, log: (msg: string) => void = () => {}): Promise<boolean> {
  if (await isSeeded(ds)) return false;
  await ds.transaction(async (manager) => {
    const instituteIds: Record<string, string> = {};
    for (const i of demoInstitutes) {
      const row = await manager.getRepository(InstituteEntity).save({ ...i });
      instituteIds[i.code] = row.id;
    }
    const userIds: Record<string, string> = {};
    for (const p of demoPeople) {
      const row = await manager.getRepository(UserEntity).save({
        email: p.email,
        displayName: p.displayName,
        role: p.role,
        instituteId: p.instituteCode ? instituteIds[p.instituteCode] : null,
      });
      userIds[p.email] = row.id;
    }
    await recordAudit(manager, null, { action: 'demo.seeded', entityType: 'database', details: { scenario: 'invented demo scenario' } });
    for (const s of featureSeeders) {
      log(`seeding ${s.name}`);
      await s.run({ manager, instituteIds, userIds });
    }
  });
  return true;
}

featureSeeders.push(registrySeeder);
featureSeeders.push(transportSeeder);
featureSeeders.push(uploadsSeeder);
// Calibration chains join accepted campaigns; before the network so the demo run includes the chain.
featureSeeders.push(chainsSeeder);
// The levelling network goes last: its stored demo adjustment run includes the sites' ties when the registry is seeded.
featureSeeders.push(networkSeeder);
// The demo certificate needs accepted campaigns with uploaded series (and their results): after every other seed.
featureSeeders.push(certificatesSeeder);
// Ratio closures of the loops of simultaneous campaigns, from the seeded series (as the closure job would).
featureSeeders.push(closuresSeeder);
