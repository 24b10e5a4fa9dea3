import type { EntityManager } from 'typeorm';
import type { ChainResult } from '../../shared/chains';
import type { ChainCertificateSnapshot } from '../../shared/certificates';
import { clockKindLabels } from '../../shared/registry';
import type { ComparisonResultDto } from '../../shared/results';
import type { Actor } from '../auth/actor';
import { publishedStates } from '../auth/campaign-scope';
import { canSeeChain, ChainNotReady, computeChain, loadChainCampaigns, type ChainCampaigns } from '../chains/chain-compute';
import { InstituteEntity } from '../db/entities/core.entities';
import { CalibrationChainEntity, ClockDeploymentEntity, ClockEntity, type CalibrationChainRow, type CampaignRow } from '../db/entities/registry.entities';
import { AppError, Conflict, Invalid, NotFound } from '../http/errors';
import { computeCampaignResult, latestResultForCampaign, storedCurrentResult } from '../results/results.service';
import { C2_M2_PER_S2 } from '../science/constants';
import { ScienceInputError } from '../science/errors';

// Turns a calibration chain and its campaigns' current results into what a chain certificate shows. No number is
// recomputed here: the certificate states what the chain computation (server/chains/chain-compute.ts) gives for the
// stored results, adding only the facts it names (campaigns, sites, periods, pinned budget versions, deployments).

/** What a chain certificate shows that comes from the chain (the rest is added at issue time). */
export type ChainSnapshotBody = Omit<
  ChainCertificateSnapshot,
  'certificateNumber' | 'revision' | 'issueDate' | 'issuingInstitute' | 'auditChainHead' | 'signer' | 'verificationUrl' | 'review'
>;

export interface ChainCertificateSource {
  chainId: string;
  chainName: string;
  row: CalibrationChainRow;
  campaigns: ChainCampaigns;
  /** Institutes of the clocks of every campaign (mail goes to their labs). */
  instituteIds: string[];
  transportableInstituteId: string;
  referenceInstituteId: string;
  body: ChainSnapshotBody;
  /** The chain computation the body was built from (the API's GET …/chains/:id/result answers the same). */
  result: ChainResult;
}

/** A chain with a campaign that is not accepted or certified cannot be certified (409, naming each campaign). */
export class ChainNotCertifiable extends AppError {
  constructor(campaigns: { id: string; name: string; state: string }[]) {
    super(409, 'chain-campaigns-not-accepted', 'Chain not ready for a certificate',
      `A chain can be certified only when every campaign it uses is accepted or certified; ${campaigns.map((c) => `“${c.name}” is '${c.state}'`).join(', ')}.`,
      { campaigns });
  }
}

/** The chain's campaigns have no current result stored yet (409 at request time, naming them). */
export class ChainResultsPending extends AppError {
  constructor(missing: { campaignId: string; name: string }[]) {
    super(409, 'chain-results-pending', 'Chain result not computed yet',
      `No current result is stored yet for ${missing.map((m) => `“${m.name}”`).join(', ')}; a worker computes it (the campaign’s results page shows its progress). Ask again when it is there.`,
      { missing });
  }
}

export const chainParts = (cs: ChainCampaigns) =>
  ([['remote', cs.remote], ['before', cs.before], ['after', cs.after]] as const).filter((x): x is ['remote' | 'before' | 'after', CampaignRow] => x[1] !== null);

/** The chain as its reader may see it: a chain (or its certificate) is invisible to whoever cannot see every campaign. */
export async function readableChain(manager: EntityManager, actor: Actor, chainId: string) {
  const row = await manager.getRepository(CalibrationChainEntity).findOne({ where: { id: chainId } });
  if (!row) throw new NotFound('Chain');
  const cs = await loadChainCampaigns(manager, row);
  if (!canSeeChain(actor, cs)) throw new NotFound('Chain');
  return { row, cs };
}

/** Mirrors the campaign rule (only an accepted or certified campaign is certified): every campaign of the chain. */
export function requireChainCertifiable(cs: ChainCampaigns): void {
  const open = chainParts(cs).map(([, c]) => c).filter((c) => !(publishedStates as readonly string[]).includes(c.state));
  if (open.length) throw new ChainNotCertifiable(open.map((c) => ({ id: c.id, name: c.name, state: c.state })));
}

const roleOf = { remote: 'remote', before: 'side-by-side-before', after: 'side-by-side-after' } as const;

function cancellationOf(result: ChainResult, tVersions: number[], tName: string): ChainSnapshotBody['cancellation'] {
  const distinct = [...new Set(tVersions)];
  const cancels = distinct.length === 1;
  const statement = cancels
    ? `${result.cancellation} Every campaign of the chain pins budget version ${distinct[0]} of ${tName}, so its systematic offset is one input quantity; the chain budget below lists it with sensitivity exactly 0.`
    : `${result.cancellation} The campaigns pin budget versions ${distinct.join(', ')} of ${tName}; they are treated as independent inputs, each with its full sensitivity (listed in the chain budget below), so the chain’s uncertainty includes ${tName}’s systematic uncertainty instead of cancelling it.`;
  return { transportableCancels: cancels, transportableBudgetVersions: distinct, statement };
}

/** Builds the certificate body from the chain computation and the campaigns' current results. */
export async function chainSnapshotBody(manager: EntityManager, row: CalibrationChainRow, cs: ChainCampaigns, result: ChainResult, results: Map<string, ComparisonResultDto>): Promise<{ body: ChainSnapshotBody; instituteIds: string[]; tInstitute: string; rInstitute: string }> {
  const clocks = new Map((await manager.getRepository(ClockEntity).find({ where: [{ id: row.transportableClockId }, { id: row.referenceClockId }], relations: { institute: true } })).map((c) => [c.id, c]));
  const T = clocks.get(row.transportableClockId);
  const R = clocks.get(row.referenceClockId);
  if (!T || !R) throw new Conflict('The chain names a clock that is no longer registered.');
  const clockPart = (c: typeof T) => ({ name: c.name, institute: c.institute?.name ?? c.instituteId, species: `${clockKindLabels[c.kind]}, ${c.species}` });
  const parts = chainParts(cs);
  const campaigns = parts.map(([part, c]) => {
    const r = results.get(c.id)!;
    const body = r.result;
    const tIs = c.clockAId === T.id ? 'A' : 'B';
    const input = result.inputs.find((x) => x.campaignId === c.id)!;
    const cal = result.calibrations.find((x) => x.which === part);
    return {
      campaignId: c.id, label: c.name, role: roleOf[part], state: c.state,
      clockA: body.clockA.name, clockB: body.clockB.name, siteA: body.clockA.site.name, siteB: body.clockB.site.name,
      period: { start: c.periodStart.toISOString(), end: c.periodEnd.toISOString() },
      transportableIs: tIs as 'A' | 'B',
      y: input.y, standardUncertaintyY: input.standardUncertaintyY,
      transportableBudgetVersion: (tIs === 'A' ? body.clockA : body.clockB).budget.version,
      partnerBudgetVersion: (tIs === 'A' ? body.clockB : body.clockA).budget.version,
      resultId: r.id,
      localTie: cal?.localTie ?? null,
    };
  });
  const starts = campaigns.map((c) => Date.parse(c.period.start));
  const ends = campaigns.map((c) => Date.parse(c.period.end));
  const from = new Date(Math.min(...starts));
  const to = new Date(Math.max(...ends));
  const deps = await manager.getRepository(ClockDeploymentEntity).find({ where: { clockId: T.id }, relations: { site: true }, order: { arrivedAt: 'ASC' } });
  const deployments = deps
    .filter((d) => d.arrivedAt < to && (d.departedAt === null || d.departedAt > from))
    .map((d) => ({ site: d.site?.name ?? d.siteId, arrivedAt: d.arrivedAt.toISOString(), departedAt: d.departedAt?.toISOString() ?? null, note: d.note }));
  const institutes = new Map((await manager.getRepository(InstituteEntity).find()).map((i) => [i.id, i.name]));
  const instituteIds = [...new Set(parts.flatMap(([, c]) => [c.instituteId, c.clockB?.instituteId ?? null]).filter((x): x is string => !!x).concat([T.instituteId, R.instituteId]))];
  const participants = instituteIds.map((id) => institutes.get(id) ?? id);
  const tide = [...new Set(parts.map(([, c]) => results.get(c.id)!.result.tide.model))];
  const software = [...new Set(parts.map(([, c]) => results.get(c.id)!.softwareVersion))].map((v) => (/chronolevel/i.test(v) ? v : `Chronolevel ${v}`));
  const d = result.deltaC_m2s2;
  const h = result.deltaH_m;
  const q = (x: typeof d) => ({
    value: x.value, standardUncertainty: x.standardUncertainty, expandedUncertainty: x.expandedUncertainty, coverageFactor: x.coverageFactor,
    coverageProbability: x.coverageProbability, effectiveDegreesOfFreedom: x.effectiveDegreesOfFreedom,
  });
  const body: ChainSnapshotBody = {
    kind: 'chain',
    schemaVersion: 1,
    participants,
    chain: { id: row.id, name: row.name, transportableClock: clockPart(T), referenceClock: clockPart(R), notes: row.notes },
    fromSite: result.fromSite.name,
    toSite: result.toSite.name,
    deltaC_m2s2: q(d),
    deltaH_m: { ...q(h), method: h.method },
    yRemote: result.yRemote, ySideBySide: result.ySideBySide, yChain: result.yChain,
    campaigns,
    deployments,
    cancellation: cancellationOf(result, campaigns.map((c) => c.transportableBudgetVersion), T.name),
    calibrations: result.calibrations.map((c) => ({ which: c.which, offset: c.offset, unsharedUncertainty: c.unsharedUncertainty, weight: c.weight })),
    transport: {
      standardUncertainty: result.transport.standardUncertainty, standardUncertainty_m2s2: C2_M2_PER_S2 * result.transport.standardUncertainty,
      origin: result.transport.origin, source: result.transport.source, degreesOfFreedom: result.transport.degreesOfFreedom,
    },
    beforeAfter: result.beforeAfter ? {
      difference: result.beforeAfter.difference, standardUncertainty: result.beforeAfter.standardUncertainty, expandedUncertainty: result.beforeAfter.expandedUncertainty,
      coverageFactor: 2, En: result.beforeAfter.en, agreed: result.beforeAfter.agreed, statement: result.beforeAfter.statement,
    } : null,
    budget: {
      outputUnit: 'm²/s²',
      rows: result.lines.map((l) => ({
        label: l.label, type: l.type, unit: l.unit, standardUncertainty: l.standardUncertainty, sensitivity_m2s2: l.sensitivity_m2s2,
        contribution_m2s2: l.contribution_m2s2, varianceShare: Math.min(1, Math.max(0, l.varianceShare)), degreesOfFreedom: l.degreesOfFreedom,
        cancels: l.cancels, enters: [...new Set(l.enters.map((e) => e.comparison))],
      })),
      combinedStandardUncertainty: d.standardUncertainty,
      coverageFactor: d.coverageFactor,
      coverageProbability: d.coverageProbability,
      effectiveDegreesOfFreedom: d.effectiveDegreesOfFreedom,
    },
    tideSystem: result.tideSystem,
    tides: `As applied in each comparison’s stored result: ${tide.join(' / ')} The chain combines these tide-corrected offsets and adds no tide correction of its own (tide system ${result.tideSystem}).`,
    softwareVersion: software.join(', '),
    method: result.method,
    assumptions: result.assumptions,
    cautions: result.cautions,
  };
  return { body, instituteIds, tInstitute: T.instituteId, rInstitute: R.instituteId };
}

async function build(manager: EntityManager, row: CalibrationChainRow, cs: ChainCampaigns, results: Map<string, ComparisonResultDto>): Promise<ChainCertificateSource> {
  let result: ChainResult;
  try {
    result = await computeChain(manager, row, cs);
  } catch (e) {
    if (e instanceof ChainNotReady) throw new ChainResultsPending(e.missing);
    if (e instanceof ScienceInputError) throw new Invalid(`The chain cannot be computed: ${e.message}`, [{ path: e.field, message: e.message }]);
    throw e;
  }
  const { body, instituteIds, tInstitute, rInstitute } = await chainSnapshotBody(manager, row, cs, result, results);
  return { chainId: row.id, chainName: row.name, row, campaigns: cs, instituteIds, transportableInstituteId: tInstitute, referenceInstituteId: rInstitute, body, result };
}

/**
 * The chain and its campaigns' current results, as the worker needs them: each campaign's stored result when its input
 * hash still matches, otherwise computed and stored now in the same transaction (as for a campaign certificate).
 */
export async function loadChainCertificateSource(manager: EntityManager, chainId: string, actor: Actor, now: Date): Promise<ChainCertificateSource> {
  const { row, cs } = await readableChain(manager, actor, chainId);
  requireChainCertifiable(cs);
  const results = new Map<string, ComparisonResultDto>();
  for (const [, c] of chainParts(cs)) {
    const current = await computeCampaignResult(manager, c.id, { actor, now });
    const stored = current.fresh ? await latestResultForCampaign(manager, c.id) : current;
    if (!stored || stored.id !== current.id) throw new Conflict(`The result of “${c.name}” changed while the certificate was being prepared; try again.`);
    results.set(c.id, stored);
  }
  return build(manager, row, cs, results);
}

/** The same from stored current results only (reads, never computes): the HTTP request's checks. Null when one is missing. */
export async function loadStoredChainCertificateSource(manager: EntityManager, chainId: string, actor: Actor): Promise<ChainCertificateSource | null> {
  const { row, cs } = await readableChain(manager, actor, chainId);
  requireChainCertifiable(cs);
  const results = new Map<string, ComparisonResultDto>();
  for (const [, c] of chainParts(cs)) {
    const stored = await storedCurrentResult(manager, c.id);
    if (!stored) return null;
    // The chain reads each campaign's latest result; it must be the current one.
    const latest = await latestResultForCampaign(manager, c.id);
    if (!latest || latest.id !== stored.id) return null;
    results.set(c.id, stored);
  }
  return build(manager, row, cs, results);
}
