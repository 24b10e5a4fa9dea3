import type { EntityManager } from 'typeorm';
import type { CampaignRole, LocalTieInput } from '../../shared/campaigns';
import { siteDuring } from '../../shared/deployments';
import { ClockDeploymentEntity, SiteEntity, type ClockRow } from '../db/entities/registry.entities';
import { Invalid } from '../http/errors';
import { ScienceInputError } from '../science/errors';
import { localTieFromBenchmarks } from '../science/side-by-side';

// Where a campaign's clocks stood: a stationary clock at its registered site, a transportable clock at the one
// deployment covering the whole campaign period. Resolved when the campaign is created and whenever its period
// changes, so every later reader (results, network, certificates) uses the same sites.

export async function siteOfClockDuring(m: EntityManager, clock: ClockRow, start: Date, end: Date, path: string): Promise<string> {
  if (clock.mobility !== 'transportable') return clock.siteId;
  const deployments = await m.getRepository(ClockDeploymentEntity).find({ where: { clockId: clock.id }, order: { arrivedAt: 'ASC' } });
  const where = siteDuring(deployments, start, end);
  if (where.ok) return where.siteId;
  throw new Invalid(`${clock.name}: ${where.message} Choose a period inside one deployment, or record the deployment first.`, [
    { path, message: where.reason === 'moved' ? `${clock.name} moved during the campaign period` : `${clock.name} was not deployed during the campaign period` },
  ]);
}

export async function resolveCampaignSites(m: EntityManager, a: ClockRow, b: ClockRow, start: Date, end: Date) {
  return { siteAId: await siteOfClockDuring(m, a, start, end, 'body.clockAId'), siteBId: await siteOfClockDuring(m, b, start, end, 'body.clockBId') };
}

export type StoredLocalTie = { localDeltaC_m2s2: number | null; localDeltaCUncertainty_m2s2: number | null; localTieSource: string | null };

/** The stored local tie of a campaign with this role at these sites (nulls for a remote campaign). */
export async function resolveLocalTie(m: EntityManager, role: CampaignRole, tie: LocalTieInput | null, siteAId: string, siteBId: string): Promise<StoredLocalTie> {
  const none = { localDeltaC_m2s2: null, localDeltaCUncertainty_m2s2: null, localTieSource: null };
  if (role === 'remote') {
    if (tie) throw new Invalid('Only a side-by-side campaign has a local tie.', [{ path: 'body.localTie', message: 'leave empty for a remote campaign' }]);
    return none;
  }
  const kind = tie?.kind ?? (siteAId === siteBId ? 'same-site' : null);
  if (kind === null) {
    throw new Invalid('The clocks stood at different sites: a side-by-side campaign needs the local tie between them (entered with its source, or from the sites’ benchmark ties).', [
      { path: 'body.localTie', message: 'required when the two sites differ' },
    ]);
  }
  if (kind === 'same-site') {
    if (siteAId !== siteBId) throw new Invalid('The clocks stood at different sites; enter the local tie between them.', [{ path: 'body.localTie.kind', message: 'the sites differ' }]);
    return { localDeltaC_m2s2: 0, localDeltaCUncertainty_m2s2: 0, localTieSource: 'both clocks at the same site: ΔC = 0 between their reference points as registered' };
  }
  if (tie?.kind === 'entered') return { localDeltaC_m2s2: tie.deltaC_m2s2, localDeltaCUncertainty_m2s2: tie.uncertainty_m2s2, localTieSource: tie.source };
  const g = tie?.kind === 'benchmarks' ? (tie.gravity_m_s2 ?? 9.81) : 9.81;
  const [sa, sb] = [await m.getRepository(SiteEntity).findOneByOrFail({ id: siteAId }), await m.getRepository(SiteEntity).findOneByOrFail({ id: siteBId })];
  if (sa.benchmarkCode === null || sb.benchmarkCode === null || sa.tieHeightDifferenceM === null || sb.tieHeightDifferenceM === null) {
    throw new Invalid('Both sites need a benchmark tie to derive the local tie; enter it with its source instead.', [{ path: 'body.localTie.kind', message: 'a site has no benchmark tie' }]);
  }
  try {
    const t = localTieFromBenchmarks(
      { benchmarkCode: sa.benchmarkCode, heightDifferenceM: sa.tieHeightDifferenceM, uncertaintyM: sa.tieUncertaintyM ?? 0 },
      { benchmarkCode: sb.benchmarkCode, heightDifferenceM: sb.tieHeightDifferenceM, uncertaintyM: sb.tieUncertaintyM ?? 0 },
      g,
    );
    return { localDeltaC_m2s2: t.deltaC_m2s2, localDeltaCUncertainty_m2s2: t.uDeltaC_m2s2, localTieSource: t.source };
  } catch (e) {
    if (e instanceof ScienceInputError) throw new Invalid(e.message, [{ path: e.field === 'gravity' ? 'body.localTie.gravity_m_s2' : 'body.localTie.kind', message: e.message }]);
    throw e;
  }
}
