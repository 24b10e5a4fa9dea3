import pg from 'pg';
import type { DataSource, EntityManager } from 'typeorm';
import { ratioFromMeasured } from '../registry/measured-ratios';
import {
  createCampaignSchema,
  editableStates,
  reviewChecklistItems,
  reviewChecklistLabels,
  type AcceptCampaign,
  type ReviewChecklistItem,
  type CampaignListQuery,
  type CampaignState,
  type CreateCampaign,
  type ReferenceRatioOverride,
  type UpdateCampaign,
  updateCampaignSchema,
} from '../../shared/campaigns';
import { speciesLabels, type BudgetRow, type SpeciesCode } from '../../shared/registry';
import { actorLabel, type Actor } from '../auth/actor';
import { authorize, can } from '../auth/permissions';
import { recordAudit } from '../audit/audit.service';
import type { AppConfig } from '../config';
import {
  CampaignEntity,
  CampaignEventEntity,
  ClockBudgetVersionEntity,
  ClockEntity,
  FibreLinkEntity,
  ReferenceFrequencyEntity,
  type CampaignRow,
  type ClockBudgetVersionRow,
  type ClockRow,
  type SiteRow,
} from '../db/entities/registry.entities';
import { Conflict, Forbidden, Invalid, NotFound } from '../http/errors';
import { JsonText } from '../http/json-text';
import { enqueueMail } from '../mail/outbox';
import { labAddresses, mailDate } from '../mail/mail-text';
import { computeCampaignResult, latestResultForReviewSql } from '../results/results.service';
import { reviewExceptions, type ResultForReview } from './review-rules';
import { closureExceptions, closureExceptionsOf, failingClosuresJsonSql, requestClosureComputation, type ClosureForReview } from '../closures/closures.service';
import { ScienceInputError } from '../science/errors';
import { parsePositiveDecimal, ratioOfFrequencies, MAX_REFERENCE_SIGNIFICANT_DIGITS } from '../science/fractional-offset';
import { rss } from '../science/uncertainty';
import { currentBudget, linkDistances, normalHeightOf, toBudgetDto } from '../registry/registry.service';
import { requestResultComputation } from '../results/result-requests';
import { campaignScopeBranches, canSeeCampaign } from '../auth/campaign-scope';
import { resolveCampaignSites, resolveLocalTie } from './campaign-sites';
import { preparedQuery } from '../db/prepared';

// Campaign rules: owning institute = clock A's institute; the lab edits only while draft or returned; the
// coordinating institute reviews; every change is audited and every state change lands on the timeline.

const transitions: Record<'submit' | 'startReview' | 'accept' | 'return' | 'certify', { from: readonly CampaignState[]; to: CampaignState }> = {
  submit: { from: ['draft', 'returned'], to: 'submitted' },
  startReview: { from: ['submitted'], to: 'in_review' },
  accept: { from: ['in_review'], to: 'accepted' },
  return: { from: ['submitted', 'in_review'], to: 'returned' },
  certify: { from: ['accepted'], to: 'certified' },
};

// ---------- reference ratio ----------

export type DefaultReferenceRatio = { value: string; relativeUncertainty: number; source: string };

/** ν_B/ν_A from the reference frequencies in use; same species → exactly 1. */
export async function defaultReferenceRatio(m: EntityManager, speciesA: SpeciesCode, speciesB: SpeciesCode): Promise<DefaultReferenceRatio> {
  if (speciesA === speciesB) return { value: '1', relativeUncertainty: 0, source: `same species (${speciesLabels[speciesA]}): reference ratio 1` };
  const refs = await m.getRepository(ReferenceFrequencyEntity).find({ where: [{ species: speciesA, inUse: true }, { species: speciesB, inUse: true }] });
  const a = refs.find((r) => r.species === speciesA);
  const b = refs.find((r) => r.species === speciesB);
  const missing = [a ? null : speciesA, b ? null : speciesB].filter(Boolean) as SpeciesCode[];
  if (missing.length) {
    throw new Invalid(`No reference frequency is in use for ${missing.map((s) => speciesLabels[s]).join(' and ')}; give a reference ratio with a justification.`, [
      { path: 'body.referenceRatio', message: 'required: no default available for these species' },
    ]);
  }
  return {
    value: ratioOfFrequencies(a!.frequencyHz, b!.frequencyHz),
    relativeUncertainty: rss([a!.relativeUncertainty, b!.relativeUncertainty]),
    source: `ν(${speciesLabels[speciesB]}) / ν(${speciesLabels[speciesA]}) from the reference-frequency table — B: ${b!.frequencyHz} Hz, u_r ${b!.relativeUncertainty}, ${b!.source}; A: ${a!.frequencyHz} Hz, u_r ${a!.relativeUncertainty}, ${a!.source}; u_r of the ratio = RSS of both`,
  };
}

function overrideRatio(o: ReferenceRatioOverride) {
  try {
    parsePositiveDecimal(o.value, 'value', MAX_REFERENCE_SIGNIFICANT_DIGITS);
  } catch (e) {
    if (e instanceof ScienceInputError) throw new Invalid(e.message, [{ path: 'body.referenceRatio.value', message: e.message }]);
    throw e;
  }
  return { referenceRatio: o.value, referenceRatioRelativeUncertainty: o.relativeUncertainty, referenceRatioSource: 'entered by the lab (replaces the default)', referenceRatioJustification: o.justification };
}

// ---------- access ----------

/** Operators read campaigns of their institute (clock A) or of clock B's institute; other roles read all. */
function canRead(actor: Actor, c: CampaignRow): boolean {
  return canSeeCampaign(actor, { state: c.state, instituteId: c.instituteId, partnerInstituteId: c.clockB?.instituteId ?? null });
}
function requireOwner(actor: Actor, c: CampaignRow) {
  if (actor.role !== 'operator' || actor.instituteId !== c.instituteId) throw new Forbidden('Only lab staff of the owning institute (clock A) change this campaign.');
}
function requireState(c: CampaignRow, allowed: readonly CampaignState[], action: string) {
  if (!allowed.includes(c.state)) throw new Conflict(`Cannot ${action} a campaign that is ${c.state.replace('_', ' ')}.`, { state: c.state, allowedFrom: allowed });
}

/**
 * Reads that do not depend on each other: at once, each on a pool connection of its own, outside a transaction
 * (one round trip instead of several); one after another inside a transaction, which has a single connection.
 */
async function independent<T extends unknown[]>(m: EntityManager, ...reads: { [K in keyof T]: () => Promise<T[K]> }): Promise<T> {
  if (m.queryRunner?.isTransactionActive) {
    const out: unknown[] = [];
    for (const read of reads) out.push(await read());
    return out as T;
  }
  return (await Promise.all(reads.map((read) => read()))) as T;
}

/**
 * The campaign with its institute, the sites of the period, the pinned budget versions, both clocks (home site,
 * institute) and the link (both sites): three small SELECTs, the last two together (two round trips outside a
 * transaction). One SELECT joining all fourteen tables cost PostgreSQL more to plan than to run (about 8 ms of
 * planning against 5 ms of execution on the scaled demo), on every read.
 */
async function loadCampaign(m: EntityManager, id: string, lock = false): Promise<CampaignRow> {
  if (lock) {
    const locked = await m.getRepository(CampaignEntity).createQueryBuilder('c').setLock('pessimistic_write').where('c.id = :id', { id }).getOne();
    if (!locked) throw new NotFound('Campaign');
  }
  const c = await m.getRepository(CampaignEntity).createQueryBuilder('c')
    .leftJoinAndSelect('c.institute', 'i')
    .leftJoinAndSelect('c.siteA', 'csa')
    .leftJoinAndSelect('c.siteB', 'csb')
    .leftJoinAndSelect('c.budgetVersionA', 'va')
    .leftJoinAndSelect('c.budgetVersionB', 'vb')
    .where('c.id = :id', { id })
    .getOne();
  if (!c) throw new NotFound('Campaign');
  const [clocks, link] = await independent(
    m,
    () => m.getRepository(ClockEntity).createQueryBuilder('k')
      .leftJoinAndSelect('k.site', 's')
      .leftJoinAndSelect('k.institute', 'ki')
      .where('k.id IN (:...ids)', { ids: [c.clockAId, c.clockBId] })
      .getMany(),
    () => m.getRepository(FibreLinkEntity).createQueryBuilder('l')
      .leftJoinAndSelect('l.siteA', 'lsa')
      .leftJoinAndSelect('l.siteB', 'lsb')
      .where('l.id = :id', { id: c.linkId })
      .getOne(),
  );
  const clockById = new Map(clocks.map((k) => [k.id, k]));
  c.clockA = clockById.get(c.clockAId);
  c.clockB = clockById.get(c.clockBId);
  c.link = link ?? undefined;
  return c;
}

async function addEvent(m: EntityManager, actor: Actor | null, campaignId: string, fromState: CampaignState | null, toState: CampaignState, note: string | null) {
  await m.getRepository(CampaignEventEntity).insert({ campaignId, fromState, toState, actorUserId: actor?.userId ?? null, actorLabel: actor ? actor.displayName : 'system', note });
}

// ---------- DTOs ----------

/** What the detail shows of a clock: built in SQL from the clock, its home site and its institute. */
type DetailClockJson = {
  name: string; species: SpeciesCode; nominalFrequencyHz: string; siteId: string; siteName: string | null; instituteId: string; instituteCode: string | null;
  currentBudgetVersion: number;
};
/** A budget version as JSON: the entity's properties, the creation time as PostgreSQL writes it. */
type DetailBudgetJson = Omit<ClockBudgetVersionRow, 'createdAt'> & { createdAt: string };
type DetailEventJson = { at: string; fromState: CampaignState | null; toState: CampaignState; actor: string; note: string | null };

/** One row holds everything the detail shows (readCampaignDetail). */
type CampaignDetailRow = {
  id: string; name: string; state: CampaignState; institute_id: string; clock_a_id: string; clock_b_id: string; link_id: string; period_start: Date; period_end: Date;
  role: CampaignRow['role']; site_a_id: string; site_b_id: string; updated_at: Date; created_at: Date; operator_notes: string; reference_ratio: string;
  reference_ratio_u_rel: number; reference_ratio_source: string; reference_ratio_justification: string | null; local_delta_c_m2s2: number | null;
  local_delta_c_u_m2s2: number | null; local_tie_source: string | null; return_reason: string | null; created_by: string;
  review_checklist: CampaignRow['reviewChecklist'] | null; accepted_by: string | null; accepted_at: Date | null; acceptance_comment: string | null;
  acceptance_justification: string | null; acceptance_exceptions: string[] | null;
  institute_code: string | null; site_a_name: string | null; site_b_name: string | null; link_name: string | null;
  clock_a: DetailClockJson | null; clock_b: DetailClockJson | null; budget_a: DetailBudgetJson | null; budget_b: DetailBudgetJson | null;
  timeline: DetailEventJson[] | null; latest_result: ResultForReview | null; failing_closures: ClosureForReview[] | null;
};

const detailClockSql = (idCol: string) => `(SELECT json_build_object('name', k.name, 'species', k.species, 'nominalFrequencyHz', k.nominal_frequency_hz,
         'siteId', k.site_id, 'siteName', (SELECT s.name FROM site s WHERE s.id = k.site_id),
         'instituteId', k.institute_id, 'instituteCode', (SELECT ki.code FROM institute ki WHERE ki.id = k.institute_id), 'currentBudgetVersion', k.current_budget_version)
    FROM clock k WHERE k.id = ${idCol})`;
const detailBudgetSql = (idCol: string) => `(SELECT json_build_object('id', v.id, 'clockId', v.clock_id, 'version', v.version, 'rows', v.rows,
         'totalCorrection', v.total_correction, 'totalUncertainty', v.total_uncertainty, 'comment', v.comment, 'deploymentId', v.deployment_id,
         'createdByUserId', v.created_by_user_id, 'createdBy', v.created_by, 'createdAt', v.created_at::text)
    FROM clock_budget_version v WHERE v.id = ${idCol})`;

/**
 * The campaign, its institute, sites, link, both clocks, pinned budget versions, timeline, the parts of its newest
 * result the review rules read and its failing closures: one statement, the campaign row by its key and each of the
 * rest a small sub-select on a primary key or index, so PostgreSQL plans single-table lookups rather than a join of
 * a dozen tables (a fourteen-table join cost about 8 ms of planning on the scaled demo; the six statements this
 * replaces cost a round trip each, in the HTTP process and in PostgreSQL). Sub-selects rather than joins inside the
 * sub-selects too: on the scaled demo the clocks' and the closures' members' joins took planning from about 0.30 to
 * 0.46 ms per read.
 * Built on first use, once: the results and closures modules that give two of its parts import this one.
 */
let detailSql: string | undefined;
const campaignDetailSql = () => (detailSql ??= `
  SELECT c.id, c.name, c.state, c.institute_id, c.clock_a_id, c.clock_b_id, c.link_id, c.period_start, c.period_end, c.role, c.site_a_id, c.site_b_id,
         c.updated_at, c.created_at, c.operator_notes, c.reference_ratio, c.reference_ratio_u_rel, c.reference_ratio_source, c.reference_ratio_justification,
         c.local_delta_c_m2s2, c.local_delta_c_u_m2s2, c.local_tie_source, c.return_reason, c.created_by, c.review_checklist, c.accepted_by, c.accepted_at,
         c.acceptance_comment, c.acceptance_justification, c.acceptance_exceptions,
         (SELECT i.code FROM institute i WHERE i.id = c.institute_id) AS institute_code,
         (SELECT s.name FROM site s WHERE s.id = c.site_a_id) AS site_a_name,
         (SELECT s.name FROM site s WHERE s.id = c.site_b_id) AS site_b_name,
         (SELECT l.name FROM fibre_link l WHERE l.id = c.link_id) AS link_name,
         ${detailClockSql('c.clock_a_id')} AS clock_a,
         ${detailClockSql('c.clock_b_id')} AS clock_b,
         ${detailBudgetSql('c.budget_version_a_id')} AS budget_a,
         ${detailBudgetSql('c.budget_version_b_id')} AS budget_b,
         (SELECT json_agg(json_build_object('at', e.at::text, 'fromState', e.from_state, 'toState', e.to_state, 'actor', e.actor_label, 'note', e.note) ORDER BY e.id)
            FROM campaign_event e WHERE e.campaign_id = c.id) AS timeline,
         ${latestResultForReviewSql('c.id')} AS latest_result,
         ${failingClosuresJsonSql('c.id')} AS failing_closures
    FROM campaign c WHERE c.id = $1`);

/** Timestamps inside the JSON columns come as PostgreSQL's text; read them as the driver reads a timestamptz column. */
const parseTimestamptz: (text: string) => Date = pg.types.getTypeParser(pg.types.builtins.TIMESTAMPTZ);

/** The detail's row inside the caller's transaction (after its changes). */
async function readCampaignDetail(m: EntityManager, id: string): Promise<CampaignDetailRow> {
  return detailRowOf(await m.query(campaignDetailSql(), [id]));
}
function detailRowOf(rows: CampaignDetailRow[]): CampaignDetailRow {
  if (!rows[0]) throw new NotFound('Campaign');
  return rows[0];
}

function clockRef(id: string, k: DetailClockJson) {
  return {
    id,
    name: k.name,
    species: k.species,
    speciesLabel: speciesLabels[k.species],
    nominalFrequencyHz: k.nominalFrequencyHz,
    site: { id: k.siteId, name: k.siteName ?? '' },
    institute: { id: k.instituteId, code: k.instituteCode ?? '' },
  };
}

function toSummary(c: CampaignDetailRow) {
  return {
    id: c.id,
    name: c.name,
    state: c.state,
    institute: { id: c.institute_id, code: c.institute_code ?? '' },
    clockA: clockRef(c.clock_a_id, c.clock_a!),
    clockB: clockRef(c.clock_b_id, c.clock_b!),
    link: { id: c.link_id, name: c.link_name ?? '' },
    periodStart: c.period_start.toISOString(),
    periodEnd: c.period_end.toISOString(),
    role: c.role,
    siteA: { id: c.site_a_id, name: c.site_a_name ?? '' },
    siteB: { id: c.site_b_id, name: c.site_b_name ?? '' },
    updatedAt: c.updated_at.toISOString(),
  };
}

const budgetOf = (b: DetailBudgetJson): ClockBudgetVersionRow => ({ ...b, createdAt: parseTimestamptz(b.createdAt) });

type ReviewPolicy = Pick<AppConfig, 'reviewMinUptimeFraction' | 'reviewFourEyes'>;

/** Operators read campaigns of their institute (clock A) or of clock B's institute; other roles read all. */
function canReadDetail(actor: Actor, c: CampaignDetailRow): boolean {
  return canSeeCampaign(actor, { state: c.state, instituteId: c.institute_id, partnerInstituteId: c.clock_b?.instituteId ?? null });
}

/** The detail of a campaign the caller may read: its latest result, timeline and failing closures included. */
function toDetail(actor: Actor, c: CampaignDetailRow, policy: ReviewPolicy) {
  const latest = c.latest_result;
  const closures = closureExceptionsOf(actor, c.failing_closures ?? []);
  const checklist = c.review_checklist ?? {};
  const owner = actor.role === 'operator' && actor.instituteId === c.institute_id;
  const review = can(actor, 'campaigns:review');
  return {
    ...toSummary(c),
    operatorNotes: c.operator_notes,
    referenceRatio: {
      value: c.reference_ratio,
      relativeUncertainty: c.reference_ratio_u_rel,
      source: c.reference_ratio_source,
      isDefault: c.reference_ratio_justification === null,
      justification: c.reference_ratio_justification,
    },
    localTie: c.role === 'side-by-side' && c.local_delta_c_m2s2 !== null
      ? { deltaC_m2s2: c.local_delta_c_m2s2, uncertainty_m2s2: c.local_delta_c_u_m2s2 ?? 0, source: c.local_tie_source ?? '' }
      : null,
    budgetA: toBudgetDto(budgetOf(c.budget_a!)),
    budgetB: toBudgetDto(budgetOf(c.budget_b!)),
    currentBudgetVersionA: c.clock_a!.currentBudgetVersion,
    currentBudgetVersionB: c.clock_b!.currentBudgetVersion,
    returnReason: c.return_reason,
    createdBy: c.created_by,
    createdAt: c.created_at.toISOString(),
    timeline: (c.timeline ?? []).map((e) => ({ at: parseTimestamptz(e.at).toISOString(), fromState: e.fromState, toState: e.toState, actor: e.actor, note: e.note })),
    review: {
      checklist: reviewChecklistItems.map((item) => {
        const tick = Object.hasOwn(checklist, item) ? checklist[item] : null;
        return { item, label: reviewChecklistLabels[item], checked: !!tick, by: tick?.by ?? null, at: tick?.at ?? null };
      }),
      exceptions: latest ? reviewExceptions(latest, policy.reviewMinUptimeFraction, undefined, closures) : closures,
      resultComputed: latest !== null,
      minUptimeFraction: policy.reviewMinUptimeFraction,
      fourEyes: policy.reviewFourEyes,
      acceptedBy: c.accepted_by,
      acceptedAt: c.accepted_at?.toISOString() ?? null,
      acceptanceComment: c.acceptance_comment,
      acceptanceJustification: c.acceptance_justification,
      acceptanceExceptions: c.acceptance_exceptions ?? [],
    },
    allowed: {
      edit: owner && editableStates.includes(c.state),
      submit: owner && transitions.submit.from.includes(c.state),
      startReview: review && transitions.startReview.from.includes(c.state),
      accept: review && transitions.accept.from.includes(c.state),
      return: review && transitions.return.from.includes(c.state),
      tick: review && c.state === 'in_review',
    },
  };
}

// ---------- for the results and certificate engineers ----------

export type SiteForResult = {
  id: string;
  name: string;
  instituteId: string;
  latitudeDeg: number;
  longitudeDeg: number;
  ellipsoidalHeightM: number;
  ellipsoidalHeightUncertaintyM: number;
  xM: number;
  yM: number;
  zM: number;
  quasigeoidHeightM: number;
  quasigeoidUncertaintyM: number;
  quasigeoidSource: 'entered' | 'grid';
  normalHeightM: number;
  normalHeightUncertaintyM: number;
  benchmarkTie: { benchmarkCode: string; heightDifferenceM: number; uncertaintyM: number } | null;
  /** Tide systems of ζ and of h (crust); null = not stated. */
  quasigeoidTideSystem?: 'mean-tide' | 'zero-tide' | 'tide-free' | null;
  ellipsoidalCrustSystem?: 'mean-tide' | 'zero-tide' | 'tide-free' | null;
  quasigeoidGridId?: string | null;
};
export type ClockForResult = {
  id: string;
  name: string;
  kind: ClockRow['kind'];
  species: SpeciesCode;
  speciesLabel: string;
  nominalFrequencyHz: string;
  instituteId: string;
  instituteCode: string;
  site: SiteForResult;
  budget: { id: string; version: number; rows: BudgetRow[]; totalCorrection: number; totalUncertainty: number; createdAt: string };
};
export type CampaignForResult = {
  id: string;
  name: string;
  state: CampaignState;
  instituteId: string;
  periodStart: string;
  periodEnd: string;
  clockA: ClockForResult;
  clockB: ClockForResult;
  link: { id: string; name: string; fibreLengthKm: number; fractionalUncertainty: number; geodesicDistanceKm: number; chordDistanceKm: number; siteAId: string; siteBId: string };
  referenceRatio: { value: string; relativeUncertainty: number; source: string; justification: string | null };
  role: CampaignRow['role'];
  /** Side-by-side: ΔC_local = C(site B) − C(site A) with its standard uncertainty and source. */
  localTie: { deltaC_m2s2: number; uncertainty_m2s2: number; source: string } | null;
};

function siteForResult(s: SiteRow): SiteForResult {
  const h = normalHeightOf(s);
  return {
    id: s.id,
    name: s.name,
    instituteId: s.instituteId,
    latitudeDeg: s.latitudeDeg,
    longitudeDeg: s.longitudeDeg,
    ellipsoidalHeightM: s.ellipsoidalHeightM,
    ellipsoidalHeightUncertaintyM: s.ellipsoidalHeightUncertaintyM,
    xM: s.xM,
    yM: s.yM,
    zM: s.zM,
    quasigeoidHeightM: s.quasigeoidHeightM,
    quasigeoidUncertaintyM: s.quasigeoidUncertaintyM,
    quasigeoidSource: s.quasigeoidSource,
    normalHeightM: h.valueM,
    normalHeightUncertaintyM: h.uncertaintyM,
    benchmarkTie: s.benchmarkCode !== null ? { benchmarkCode: s.benchmarkCode, heightDifferenceM: s.tieHeightDifferenceM ?? 0, uncertaintyM: s.tieUncertaintyM ?? 0 } : null,
    quasigeoidTideSystem: s.quasigeoidTideSystem ?? null,
    ellipsoidalCrustSystem: s.ellipsoidalCrustSystem ?? null,
    quasigeoidGridId: s.quasigeoidGridId,
  };
}

/**
 * Everything a comparison result needs about a campaign: both clocks (species, nominal frequency, site with
 * GRS80 position, heights and ζ), the pinned budget versions, the link and the reference ratio. No access check:
 * the caller has authorised already and passes its transaction.
 */
export async function getCampaignForResult(manager: EntityManager, id: string): Promise<CampaignForResult> {
  const c = await loadCampaign(manager, id);
  // The site is where the clock stood during the campaign (its deployment), not necessarily its registered home site.
  const clock = (k: ClockRow, b: NonNullable<CampaignRow['budgetVersionA']>, site: SiteRow): ClockForResult => ({
    id: k.id,
    name: k.name,
    kind: k.kind,
    species: k.species,
    speciesLabel: speciesLabels[k.species],
    nominalFrequencyHz: k.nominalFrequencyHz,
    instituteId: k.instituteId,
    instituteCode: k.institute?.code ?? '',
    site: siteForResult(site),
    budget: { id: b.id, version: b.version, rows: b.rows, totalCorrection: b.totalCorrection, totalUncertainty: b.totalUncertainty, createdAt: b.createdAt.toISOString() },
  });
  const l = c.link!;
  return {
    id: c.id,
    name: c.name,
    state: c.state,
    instituteId: c.instituteId,
    periodStart: c.periodStart.toISOString(),
    periodEnd: c.periodEnd.toISOString(),
    clockA: clock(c.clockA!, c.budgetVersionA!, c.siteA!),
    clockB: clock(c.clockB!, c.budgetVersionB!, c.siteB!),
    link: { id: l.id, name: l.name, fibreLengthKm: l.fibreLengthKm, fractionalUncertainty: l.fractionalUncertainty, siteAId: l.siteAId, siteBId: l.siteBId, ...linkDistances(l.siteA!, l.siteB!) },
    referenceRatio: { value: c.referenceRatio, relativeUncertainty: c.referenceRatioRelativeUncertainty, source: c.referenceRatioSource, justification: c.referenceRatioJustification },
    role: c.role,
    localTie: c.role === 'side-by-side' && c.localDeltaC_m2s2 !== null ? { deltaC_m2s2: c.localDeltaC_m2s2, uncertainty_m2s2: c.localDeltaCUncertainty_m2s2 ?? 0, source: c.localTieSource ?? '' } : null,
  };
}

/** accepted → certified, inside the certificate's transaction; audited and put on the timeline. */
export async function markCampaignCertified(manager: EntityManager, campaignId: string, actor: Actor): Promise<void> {
  authorize(actor, 'certificates:issue');
  const c = await loadCampaign(manager, campaignId, true);
  requireState(c, transitions.certify.from, 'certify');
  await manager.getRepository(CampaignEntity).update({ id: c.id }, { state: 'certified' });
  await addEvent(manager, actor, c.id, c.state, 'certified', null);
  await recordAudit(manager, actor, { action: 'campaign.certified', entityType: 'campaign', entityId: c.id, instituteId: c.instituteId, details: { from: c.state, to: 'certified' } });
}

// ---------- service ----------

// Sort names come from the list's zod enum; a Map so no inherited name (`__proto__`, `constructor`) can match.
// Each sort is the column in the page query (campaign c, institute i) and the same column of the page's rows (p).
const sortColumns = new Map<NonNullable<CampaignListQuery['sort']>, readonly [string, string]>([
  ['name', ['c.name', 'p.name']],
  ['state', ['c.state', 'p.state']],
  ['periodStart', ['c.period_start', 'p.period_start']],
  ['periodEnd', ['c.period_end', 'p.period_end']],
  ['updatedAt', ['c.updated_at', 'p.updated_at']],
  ['institute', ['i.code', 'p.institute_code']],
]);

// The list's items are written as JSON text by PostgreSQL (the shape of campaignSummarySchema, shared/campaigns.ts)
// and passed on as they are: this process builds, parses and serialises no row. Text goes through to_json (JSON's
// string escaping, the same as JSON.stringify); uuids, states, roles and timestamps are plain ASCII. Every operand
// of || is non-null (a NULL would void the whole item): the campaign's own columns are NOT NULL, the joined ones
// are coalesced as the TypeScript mapping did ('' for a missing name).
const jsonText = (expr: string) => `to_json(coalesce(${expr}, ''))::text`;
const jsonUuid = (expr: string) => `'"' || coalesce(${expr}::text, '') || '"'`;
/** A timestamp the way Date.prototype.toISOString writes it (UTC, milliseconds truncated, 'Z'). */
const jsonIso = (col: string) => `'"' || to_char(${col} AT TIME ZONE 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.MS"Z"') || '"'`;
const sqlString = (text: string) => `'${text.replace(/'/g, "''")}'`;
/** The species' label as JSON text, from shared/registry.ts (constants, never input). */
const speciesLabelJson = (col: string) =>
  `CASE ${col} ${Object.entries(speciesLabels).map(([code, label]) => `WHEN ${sqlString(code)} THEN ${sqlString(JSON.stringify(label))}`).join(' ')} ELSE '""' END`;

/** A clock as the list shows it: the clock (alias k<x>), its home site (ks<x>) and its institute (ki<x>), joined to the page. */
const clockRefJson = (x: 'a' | 'b') =>
  `'{"id":"' || p.clock_${x}_id || '","name":' || ${jsonText(`k${x}.name`)} || ',"species":' || coalesce(to_json(k${x}.species)::text, 'null')
     || ',"speciesLabel":' || ${speciesLabelJson(`k${x}.species`)} || ',"nominalFrequencyHz":' || ${jsonText(`k${x}.nominal_frequency_hz`)}
     || ',"site":{"id":' || ${jsonUuid(`k${x}.site_id`)} || ',"name":' || ${jsonText(`ks${x}.name`)} || '}'
     || ',"institute":{"id":' || ${jsonUuid(`k${x}.institute_id`)} || ',"code":' || ${jsonText(`ki${x}.code`)} || '}}'`;
const clockRefJoins = (x: 'a' | 'b') =>
  `LEFT JOIN clock k${x} ON k${x}.id = p.clock_${x}_id LEFT JOIN site ks${x} ON ks${x}.id = k${x}.site_id LEFT JOIN institute ki${x} ON ki${x}.id = k${x}.institute_id`;
const listItemJson = `'{"id":"' || p.id || '","name":' || to_json(p.name)::text || ',"state":' || to_json(p.state)::text
     || ',"institute":{"id":"' || p.institute_id || '","code":' || ${jsonText('p.institute_code')} || '}'
     || ',"clockA":' || ${clockRefJson('a')} || ',"clockB":' || ${clockRefJson('b')}
     || ',"link":{"id":"' || p.link_id || '","name":' || ${jsonText('l.name')} || '}'
     || ',"periodStart":' || ${jsonIso('p.period_start')} || ',"periodEnd":' || ${jsonIso('p.period_end')} || ',"role":' || to_json(p.role)::text
     || ',"siteA":{"id":"' || p.site_a_id || '","name":' || ${jsonText('sa.name')} || '},"siteB":{"id":"' || p.site_b_id || '","name":' || ${jsonText('sb.name')} || '}'
     || ',"updatedAt":' || ${jsonIso('p.updated_at')} || '}'`;

/**
 * One page of the campaigns the caller may see, and their number: one statement whatever the page size.
 * The page is found on the campaign table and its institute (the visibility rule on the campaign's own columns, the
 * sort's index, LIMIT/OFFSET), and only its rows are joined to their clocks, sites and link: a join of all twelve
 * tables before the cut made PostgreSQL spend tens of milliseconds planning every request, and the count walked the
 * join. Joined after the cut, the plan costs about a millisecond and, for the first page, is made once per pooled
 * connection (a prepared statement, server/db/prepared.ts); correlated sub-selects per row cost 0.3 ms more to run.
 * The answer is the one toSummary() gives for the fully joined campaign (tests/api/campaign-list-parity.test.ts).
 */
/** Page sizes whose first page is a statement of its own (the pages' choices, and the API's default of 25). */
const PREPARED_PAGE_SIZES = new Set([10, 20, 25, 50, 100]);

async function listCampaigns(dataSource: DataSource, actor: Actor, q: CampaignListQuery) {
  const params: unknown[] = [];
  const param = (v: unknown) => `$${params.push(v)}`;
  const branches = campaignScopeBranches(actor, { state: 'c.state', institute: 'c.institute_id', partnerInstitute: 'c.partner_institute_id' }, param);
  const extra: string[] = [];
  if (q.q) {
    const text = param(`%${q.q}%`);
    extra.push(`(c.name ILIKE ${text} OR i.code ILIKE ${text} OR EXISTS (SELECT 1 FROM clock k WHERE k.id IN (c.clock_a_id, c.clock_b_id) AND k.name ILIKE ${text}))`);
  }
  if (q.state) extra.push(`c.state = ${param(q.state)}`);
  const [inner, outer] = sortColumns.get(q.sort ?? 'updatedAt') ?? ['c.updated_at', 'p.updated_at'];
  const dir = q.order === 'desc' ? 'DESC' : 'ASC';
  const filter = [branches.length === 1 ? branches[0] : `(${branches.join(' OR ')})`, ...extra].join(' AND ');
  // The first page (what the campaigns page opens with) has its size in the statement's text: with LIMIT and OFFSET
  // as parameters PostgreSQL's generic plan assumes a tenth of the rows skipped and is never chosen, so every request
  // would be planned again. Later pages, and first pages of other sizes, keep both as parameters and are planned per
  // request. Only the usual sizes go into the text, so a caller cannot make a prepared statement per number
  // (PostgreSQL keeps each until the connection ends; tests/api/prepared-statements.test.ts).
  const first = q.page === 1 && PREPARED_PAGE_SIZES.has(q.pageSize);
  const limit = first ? String(q.pageSize) : param(q.pageSize);
  const offset = first ? '0' : param((q.page - 1) * q.pageSize);
  // Without a text filter the visibility rule and the state filter read only the campaign's state, institute and
  // partner institute, so the total is the same condition summed over campaign_tally (kept by triggers, migration
  // CampaignTally). The text filter needs the campaigns themselves and the institute's code.
  // institute_id is NOT NULL and a foreign key, so the page's inner join keeps every campaign (and lets PostgreSQL
  // walk the institutes in code order for the sort by institute).
  const total = q.q
    ? `SELECT count(*)::int AS total FROM "campaign" c JOIN institute i ON i.id = c.institute_id WHERE ${filter}`
    : `SELECT coalesce(sum(c.n), 0)::int AS total FROM campaign_tally c WHERE ${filter}`;
  // The page: one branch of the visibility rule is read in the sort's order and cut; several (an operator's own and
  // partner campaigns) are each read in that order up to the page's end and merged.
  const branchSql = (cond: string) => `
            SELECT c.id, c.name, c.state, c.institute_id, i.code AS institute_code, c.clock_a_id, c.clock_b_id, c.link_id, c.period_start, c.period_end,
                   c.role, c.site_a_id, c.site_b_id, c.updated_at
              FROM "campaign" c JOIN institute i ON i.id = c.institute_id
             WHERE ${[cond, ...extra].join(' AND ')}
             ORDER BY ${inner} ${dir}, c.id`;
  const pageSql = branches.length === 1
    ? `${branchSql(branches[0])} LIMIT ${limit} OFFSET ${offset}`
    : `SELECT * FROM (${branches.map((b) => `(${branchSql(b)} LIMIT ${first ? limit : `${limit}::int + ${offset}::int`})`).join(' UNION ALL ')}) u
             ORDER BY ${outer.replace(/^p\./, 'u.')} ${dir}, u.id LIMIT ${limit} OFFSET ${offset}`;
  // The count and the page travel as one statement (one round trip); the count's row stands alone when the page is
  // empty.
  // The comment names the statement in pg_stat_activity, whose copy of a statement's text is cut at 1 KiB (after
  // SELECT: text that does not begin with SELECT or WITH is not taken for a plain read, server/db/replicas.ts).
  const sql = `SELECT /* campaign list */ n.total, '[' || coalesce(string_agg(${listItemJson}, ',' ORDER BY ${outer} ${dir}, p.id), '') || ']' AS items
      FROM (${total}) n
      LEFT JOIN LATERAL (${pageSql}) p ON true
      ${clockRefJoins('a')}
      ${clockRefJoins('b')}
      LEFT JOIN fibre_link l ON l.id = p.link_id LEFT JOIN site sa ON sa.id = p.site_a_id LEFT JOIN site sb ON sb.id = p.site_b_id
     GROUP BY n.total`;
  const [found]: { total: number; items: string }[] = await preparedQuery(dataSource, sql, params);
  return new JsonText(`{"items":${found.items},"total":${found.total},"page":${q.page},"pageSize":${q.pageSize}}`);
}

export function createCampaignsService(deps: { dataSource: DataSource; config: Pick<AppConfig, 'coordinatorMail' | 'publicUrl' | 'databaseUrl' | 'reviewMinUptimeFraction' | 'reviewFourEyes'> }) {
  const { dataSource, config } = deps;
  /** The campaign's detail as it stands (inside the caller's transaction, after its changes). */
  const detail = async (m: EntityManager, actor: Actor, id: string) => toDetail(actor, await readCampaignDetail(m, id), config);

  /** The link must join the sites where the clocks stood during the campaign. */
  async function checkLinkJoinsClocks(m: EntityManager, linkId: string, siteAId: string, siteBId: string) {
    const link = await m.getRepository(FibreLinkEntity).findOneBy({ id: linkId });
    if (!link) throw new Invalid('Unknown fibre link.', [{ path: 'body.linkId', message: 'no such link' }]);
    const ends = new Set([link.siteAId, link.siteBId]);
    const joins = siteAId === siteBId ? ends.has(siteAId) : ends.has(siteAId) && ends.has(siteBId);
    if (!joins) throw new Invalid('The link must join the sites of clock A and clock B.', [{ path: 'body.linkId', message: 'does not join the two clocks’ sites' }]);
    return link;
  }
  async function clockOrInvalid(m: EntityManager, id: string, path: string) {
    const c = await m.getRepository(ClockEntity).findOne({ where: { id }, relations: { site: true } });
    if (!c) throw new Invalid('Unknown clock.', [{ path, message: 'no such clock' }]);
    return c;
  }
  async function budgetByVersion(m: EntityManager, clockId: string, version: number, path: string) {
    const b = await m.getRepository(ClockBudgetVersionEntity).findOneBy({ clockId, version });
    if (!b) throw new Invalid('No such budget version.', [{ path, message: `version ${version} does not exist` }]);
    return b;
  }
  async function mailLab(m: EntityManager, c: CampaignRow, subject: string, lines: string[]) {
    const text = [...lines, `Open it: ${config.publicUrl}/campaigns/${c.id}`].join('\n');
    for (const to of await labAddresses(m, [c.instituteId, c.clockB?.instituteId])) await enqueueMail(m, { to, subject, text });
  }

  async function transition(actor: Actor, id: string, kind: 'submit' | 'startReview' | 'accept' | 'return', note: string | null, acceptance?: AcceptCampaign) {
    authorize(actor, kind === 'submit' ? 'campaigns:write' : 'campaigns:review');
    return dataSource.transaction(async (m) => {
      const c = await loadCampaign(m, id, true);
      if (!canRead(actor, c)) throw new NotFound('Campaign');
      if (kind === 'submit') requireOwner(actor, c);
      const t = transitions[kind];
      requireState(c, t.from, kind === 'startReview' ? 'start the review of' : kind);
      const now = new Date();
      const patch: Partial<CampaignRow> = { state: t.to };
      const details: Record<string, unknown> = { from: c.state, to: t.to, note };
      if (kind === 'return') patch.returnReason = note;
      // A new review starts from an empty checklist and no earlier decision.
      if (kind === 'startReview') Object.assign(patch, { reviewChecklist: {}, acceptedByUserId: null, acceptedBy: null, acceptedAt: null, acceptanceComment: null, acceptanceJustification: null, acceptanceExceptions: [] });
      if (kind === 'accept') {
        const a = acceptance!;
        const checklist = c.reviewChecklist ?? {};
        const open = reviewChecklistItems.filter((i) => !Object.hasOwn(checklist, i));
        if (open.length) {
          throw new Conflict(`Tick every item of the reviewer's checklist before accepting: ${open.map((i) => reviewChecklistLabels[i]).join('; ')}.`, { unticked: open });
        }
        let result = null;
        let why: string | undefined;
        try {
          result = (await computeCampaignResult(m, id, { actor, now })).result;
        } catch (e) {
          if (!(e instanceof Conflict)) throw e;
          why = e.message.replace(/\.$/, '');
        }
        const exceptions = reviewExceptions(result, config.reviewMinUptimeFraction, why, await closureExceptions(m, actor, id));
        if (exceptions.length && !a.justification) {
          throw new Invalid(`Accepting needs a written justification: ${exceptions.map((x) => x.text).join(' ')}`, [
            { path: 'body.justification', message: `required: ${exceptions.map((x) => x.code).join(', ')}` },
          ]);
        }
        const justification = exceptions.length ? a.justification! : null;
        Object.assign(patch, {
          acceptedByUserId: actor.userId, acceptedBy: actor.displayName, acceptedAt: now, acceptanceComment: a.comment,
          acceptanceJustification: justification, acceptanceExceptions: exceptions.map((x) => x.text),
        });
        Object.assign(details, { comment: a.comment, justification, exceptions: exceptions.map((x) => x.text) });
        note = a.comment;
      }
      await m.getRepository(CampaignEntity).update({ id }, patch);
      await addEvent(m, actor, id, c.state, t.to, note);
      details.note = note;
      await recordAudit(m, actor, { action: `campaign.${t.to}`, entityType: 'campaign', entityId: id, instituteId: c.instituteId, details });
      if (kind === 'accept' && (await m.query('SELECT 1 FROM ratio_series WHERE campaign_id = $1 LIMIT 1', [id])).length > 0) {
        await requestResultComputation(m, config.databaseUrl, actor, id, 'accept');
        await requestClosureComputation(m, config.databaseUrl, 'accept', id);
      }
      if (kind === 'submit') {
        await enqueueMail(m, {
          to: config.coordinatorMail,
          subject: `Campaign submitted for review: ${c.name}`,
          text: [
            `${actorLabel(actor)} submitted the campaign "${c.name}" for review on ${mailDate(now)}.`,
            `Clock A: ${c.clockA!.name} (${speciesLabels[c.clockA!.species]}), ${c.institute?.code ?? ''}`,
            `Clock B: ${c.clockB!.name} (${speciesLabels[c.clockB!.species]}), ${c.clockB!.institute?.code ?? ''}`,
            `Period: ${mailDate(c.periodStart)} – ${mailDate(c.periodEnd)}`,
            `Open it: ${config.publicUrl}/campaigns/${c.id}`,
          ].join('\n'),
        });
      }
      if (kind === 'return') {
        await mailLab(m, c, `Campaign returned: ${c.name}`, [
          `${actor.displayName} returned the campaign "${c.name}" to the lab on ${mailDate(now)}.`,
          '',
          `Reason: ${note ?? ''}`,
          '',
          'The campaign can be changed again and resubmitted.',
          `Period: ${mailDate(c.periodStart)} – ${mailDate(c.periodEnd)}`,
        ]);
      }
      if (kind === 'accept') {
        const justification = patch.acceptanceJustification;
        await mailLab(m, c, `Campaign accepted: ${c.name}`, [
          `${actor.displayName} accepted the campaign "${c.name}" on ${mailDate(now)}.`,
          '',
          `Reviewer's comment: ${acceptance!.comment}`,
          ...(justification ? ['', `Accepted despite: ${(patch.acceptanceExceptions ?? []).join(' ')}`, `Justification: ${justification}`] : []),
          '',
          `Period: ${mailDate(c.periodStart)} – ${mailDate(c.periodEnd)}`,
          'A certificate can now be issued by the coordinating institute.',
        ]);
      }
      return detail(m, actor, id);
    });
  }

  async function tick(actor: Actor, id: string, item: ReviewChecklistItem, checked: boolean) {
    authorize(actor, 'campaigns:review');
    return dataSource.transaction(async (m) => {
      const c = await loadCampaign(m, id, true);
      requireState(c, ['in_review'], 'tick the checklist of');
      const checklist = { ...(c.reviewChecklist ?? {}) };
      const was = Object.hasOwn(checklist, item);
      if (checked) checklist[item] = { by: actor.displayName, at: new Date().toISOString() };
      else delete checklist[item];
      if (was !== checked) {
        await m.getRepository(CampaignEntity).update({ id }, { reviewChecklist: checklist });
        await recordAudit(m, actor, {
          action: checked ? 'campaign.checklist-ticked' : 'campaign.checklist-unticked', entityType: 'campaign', entityId: id, instituteId: c.instituteId,
          details: { item, check: reviewChecklistLabels[item], checked },
        });
      }
      return detail(m, actor, id);
    });
  }

  return {
    async list(actor: Actor, q: CampaignListQuery) {
      authorize(actor, 'campaigns:read');
      return listCampaigns(dataSource, actor, q);
    },

    async get(actor: Actor, id: string) {
      authorize(actor, 'campaigns:read');
      // One statement, so one snapshot, and no transaction (BEGIN and COMMIT would only add two round trips); a named
      // prepared statement, parsed once per pooled connection and then planned generically: parsing and planning it
      // cost PostgreSQL more than running it.
      const c = detailRowOf(await preparedQuery<CampaignDetailRow>(dataSource, campaignDetailSql(), [id]));
      if (!canReadDetail(actor, c)) throw new NotFound('Campaign');
      return toDetail(actor, c, config);
    },

    async defaultRatio(actor: Actor, clockAId: string, clockBId: string) {
      authorize(actor, 'campaigns:read');
      return dataSource.transaction(async (m) => {
        const a = await clockOrInvalid(m, clockAId, 'query.clockAId');
        const b = await clockOrInvalid(m, clockBId, 'query.clockBId');
        return defaultReferenceRatio(m, a.species, b.species);
      });
    },

    async create(actor: Actor, input: CreateCampaign) {
      authorize(actor, 'campaigns:write');
      const body = createCampaignSchema.parse(input);
      return dataSource.transaction(async (m) => {
        const a = await clockOrInvalid(m, body.clockAId, 'body.clockAId');
        const b = await clockOrInvalid(m, body.clockBId, 'body.clockBId');
        if (a.instituteId !== actor.instituteId) throw new Forbidden('Clock A must belong to your institute: the owning institute is clock A’s.');
        const sites = await resolveCampaignSites(m, a, b, new Date(body.periodStart), new Date(body.periodEnd));
        const tie = await resolveLocalTie(m, body.role, body.localTie, sites.siteAId, sites.siteBId);
        await checkLinkJoinsClocks(m, body.linkId, sites.siteAId, sites.siteBId);
        const ratio = body.referenceRatio
          ? body.referenceRatio.measuredRatioId
            ? await ratioFromMeasured(m, { measuredRatioId: body.referenceRatio.measuredRatioId, justification: body.referenceRatio.justification }, a.species, b.species)
            : overrideRatio(body.referenceRatio as ReferenceRatioOverride)
          : await defaultReferenceRatio(m, a.species, b.species).then((d) => ({ referenceRatio: d.value, referenceRatioRelativeUncertainty: d.relativeUncertainty, referenceRatioSource: d.source, referenceRatioJustification: null }));
        const [budgetA, budgetB] = [await currentBudget(m, a), await currentBudget(m, b)];
        const repo = m.getRepository(CampaignEntity);
        const saved = await repo.save(
          repo.create({
            name: body.name,
            instituteId: a.instituteId,
            clockAId: a.id,
            clockBId: b.id,
            linkId: body.linkId,
            periodStart: new Date(body.periodStart),
            periodEnd: new Date(body.periodEnd),
            role: body.role,
            ...sites,
            ...tie,
            operatorNotes: body.operatorNotes,
            ...ratio,
            budgetVersionAId: budgetA.id,
            budgetVersionBId: budgetB.id,
            state: 'draft',
            returnReason: null,
            createdByUserId: actor.userId,
            createdBy: actor.displayName,
          }),
        );
        await addEvent(m, actor, saved.id, null, 'draft', 'created');
        await recordAudit(m, actor, {
          action: 'campaign.created', entityType: 'campaign', entityId: saved.id, instituteId: a.instituteId,
          details: { name: body.name, clockA: a.name, clockB: b.name, role: body.role, siteAId: sites.siteAId, siteBId: sites.siteBId, localTie: tie, referenceRatio: ratio.referenceRatio, budgetVersionA: budgetA.version, budgetVersionB: budgetB.version },
        });
        return detail(m, actor, saved.id);
      });
    },

    async update(actor: Actor, id: string, input: UpdateCampaign) {
      authorize(actor, 'campaigns:write');
      const body = updateCampaignSchema.parse(input);
      return dataSource.transaction(async (m) => {
        const c = await loadCampaign(m, id, true);
        if (!canRead(actor, c)) throw new NotFound('Campaign');
        requireOwner(actor, c);
        requireState(c, editableStates, 'change');
        const patch: Partial<CampaignRow> = {};
        if (body.name !== undefined) patch.name = body.name;
        if (body.operatorNotes !== undefined) patch.operatorNotes = body.operatorNotes;
        if (body.periodStart !== undefined) patch.periodStart = new Date(body.periodStart);
        if (body.periodEnd !== undefined) patch.periodEnd = new Date(body.periodEnd);
        const start = patch.periodStart ?? c.periodStart;
        const end = patch.periodEnd ?? c.periodEnd;
        if (end <= start) throw new Invalid('The period must end after it starts.', [{ path: 'body.periodEnd', message: 'must be after the period start' }]);
        // A changed period may put a transportable clock at another site: resolve the sites again, then the tie and link.
        const sites = await resolveCampaignSites(m, c.clockA!, c.clockB!, start, end);
        if (sites.siteAId !== c.siteAId || sites.siteBId !== c.siteBId) Object.assign(patch, sites);
        const role = body.role ?? c.role;
        const sitesMoved = sites.siteAId !== c.siteAId || sites.siteBId !== c.siteBId;
        if (body.role !== undefined || body.localTie !== undefined || sitesMoved) {
          const keptTie = c.role === 'side-by-side' && c.localDeltaC_m2s2 !== null && !sitesMoved && c.siteAId !== c.siteBId
            ? { kind: 'entered' as const, deltaC_m2s2: c.localDeltaC_m2s2, uncertainty_m2s2: c.localDeltaCUncertainty_m2s2 ?? 0, source: c.localTieSource ?? 'as stored' }
            : null;
          const tieInput = body.localTie !== undefined ? body.localTie : role === 'remote' ? null : keptTie;
          Object.assign(patch, { role, ...(await resolveLocalTie(m, role, tieInput, sites.siteAId, sites.siteBId)) });
        }
        if (body.linkId !== undefined || sitesMoved) {
          await checkLinkJoinsClocks(m, body.linkId ?? c.linkId, sites.siteAId, sites.siteBId);
          if (body.linkId !== undefined) patch.linkId = body.linkId;
        }
        if (body.referenceRatio !== undefined) {
          Object.assign(
            patch,
            body.referenceRatio
              ? body.referenceRatio.measuredRatioId
                ? await ratioFromMeasured(m, { measuredRatioId: body.referenceRatio.measuredRatioId, justification: body.referenceRatio.justification }, c.clockA!.species, c.clockB!.species)
                : overrideRatio(body.referenceRatio as ReferenceRatioOverride)
              : await defaultReferenceRatio(m, c.clockA!.species, c.clockB!.species).then((d) => ({ referenceRatio: d.value, referenceRatioRelativeUncertainty: d.relativeUncertainty, referenceRatioSource: d.source, referenceRatioJustification: null })),
          );
        }
        if (body.budgetVersionA !== undefined) patch.budgetVersionAId = (await budgetByVersion(m, c.clockAId, body.budgetVersionA, 'body.budgetVersionA')).id;
        if (body.budgetVersionB !== undefined) patch.budgetVersionBId = (await budgetByVersion(m, c.clockBId, body.budgetVersionB, 'body.budgetVersionB')).id;
        if (Object.keys(patch).length) await m.getRepository(CampaignEntity).update({ id }, patch);
        await recordAudit(m, actor, {
          action: 'campaign.updated', entityType: 'campaign', entityId: id, instituteId: c.instituteId,
          details: { changed: Object.keys(body), before: { name: c.name, linkId: c.linkId, referenceRatio: c.referenceRatio, budgetVersionA: c.budgetVersionA!.version, budgetVersionB: c.budgetVersionB!.version }, after: body },
        });
        return detail(m, actor, id);
      });
    },

    submit: (actor: Actor, id: string, note?: string) => transition(actor, id, 'submit', note ?? null),
    startReview: (actor: Actor, id: string, note?: string) => transition(actor, id, 'startReview', note ?? null),
    accept: (actor: Actor, id: string, body: AcceptCampaign) => transition(actor, id, 'accept', body.comment, body),
    tick,
    returnToLab: (actor: Actor, id: string, reason: string) => transition(actor, id, 'return', reason),
  };
}
