import path from 'node:path';
import type { Actor } from '../server/auth/actor';
import { loadConfig } from '../server/config';
import { UserEntity } from '../server/db/entities/core.entities';
import { issueChainInline, issueInline } from '../server/certificates/certificate-requests';
import { DEMO_CHAIN_NAME } from './chains.seed';
import type { Seeder } from './demo';

// Demo certificate: the coordinator of the invented scenario certifies one accepted campaign with uploaded series, so an
// auditor finds a signed PDF to download and verify. Its result is the stored one, or is computed here through the
// results service when no seed stored it. Runs after the campaign, upload and result seeds. Then the demo calibration
// chain's certificate.

const DEMO_COORDINATOR = 'ansel.brandt@geopotential-office.invalid';

export const certificatesSeeder: Seeder = {
  name: 'certificates',
  run: async ({ manager }) => {
    // The first accepted campaign with uploaded series; its result is computed now if the results seed did not.
    const [candidate]: { id: string }[] = await manager.query(
      `SELECT c.id FROM campaign c WHERE c.state = 'accepted' AND EXISTS (SELECT 1 FROM ratio_series s WHERE s.campaign_id = c.id) ORDER BY c.period_start, c.id LIMIT 1`,
    );
    if (!candidate) return;
    const campaignId = candidate.id;
    const user = await manager.getRepository(UserEntity).findOneByOrFail({ email: DEMO_COORDINATOR });
    const actor: Actor = { userId: user.id, email: user.email, displayName: user.displayName, role: user.role, instituteId: user.instituteId, via: 'token' };
    // The seed runs in the server process (npm start) or a test process; both name the secrets folder in SECRETS_DIR,
    // so the demo certificate is signed by the same institute key the app later pins.
    const config = loadConfig({
      ...process.env,
      DATABASE_URL: process.env.DATABASE_URL ?? 'postgres://unused-by-the-seed',
      SESSION_SECRET: process.env.SESSION_SECRET ?? 'unused-by-the-certificate-seed',
      SECRETS_DIR: path.resolve(process.env.SECRETS_DIR ?? '.secrets'),
    });
    // Seeds run before any worker: the request is carried out here, in the seed's transaction, as a worker would.
    await issueInline(manager, config, actor, campaignId, {
      comment: 'Demo: reviewed against the pinned budgets and the uploaded series.',
      justification: 'Demo: the invented scenario certifies this campaign as it stands; a real review would explain each exception here.',
    });
    // The demo calibration chain is certified too, when every campaign of it is accepted (their results are computed
    // here as the worker would), so the chain page and the auditor's list show a signed chain certificate.
    const [chain]: { id: string }[] = await manager.query(
      `SELECT ch.id FROM calibration_chain ch WHERE ch.name = $1 AND NOT EXISTS (
         SELECT 1 FROM campaign c WHERE c.id IN (ch.remote_campaign_id, ch.before_campaign_id, ch.after_campaign_id) AND c.state NOT IN ('accepted', 'certified'))`,
      [DEMO_CHAIN_NAME],
    );
    if (chain) {
      await issueChainInline(manager, config, actor, chain.id, {
        comment: 'Demo: chain reviewed against both side-by-side calibrations, the deployment record and the pinned budget version of the transportable clock.',
      });
    }
  },
};
