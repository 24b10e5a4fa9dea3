import crypto from 'node:crypto';
import type { DataSource, EntityManager } from 'typeorm';
import type { ClosureDetail, ClosureListQuery, ClosureSummary } from '../../shared/closures';
import type { Page } from '../../shared/http';
import type { ReviewException } from '../../shared/campaigns';
import type { Actor } from '../auth/actor';
import { canSeeCampaign, type CampaignOwnership } from '../auth/campaign-scope';
import { authorize } from '../auth/permissions';
import { recordAudit } from '../audit/audit.service';
import { getCampaignForResult, type CampaignForResult } from '../campaigns/campaigns.service';
import { csvLine } from '../http/csv';
import { NotFound } from '../http/errors';
import { queueFor, CLOSURE_QUEUE, type ClosureJob } from '../jobs/queue';
import { inputHashOf, SOFTWARE_VERSION } from '../results/compute-result';
import { loadCampaignSamples, loadFiles } from '../results/results.service';
import { ScienceInputError } from '../science/errors';
import { CLOSURE_METHOD, computeClosure, findClosureLoops, type ClosureClock, type ClosureLegInput, type FoundLoop } from '../science/ratio-closure';

// Clock-ratio closures: the job finds every loop of campaigns that ran at the same time, computes the closures whose
// inputs changed and stores them (ratio_closure); reads only read. A closure is visible to a caller only when every
// campaign of its loop is (server/auth/campaign-scope.ts), in lists, details, exports and review exceptions alike.

const MJD_UNIX_EPOCH = 40_587;
const msToMjd = (ms: number) => ms / 86_400_000 + MJD_UNIX_EPOCH;

/** Puts a closure computation on the queue inside the caller's transaction. */
export async function requestClosureComputation(manager: EntityManager, databaseUrl: string, reason: ClosureJob['reason'], campaignId: string | null): Promise<void> {
  const boss = await queueFor(databaseUrl);
  await boss.send(CLOSURE_QUEUE, { reason, campaignId } satisfies ClosureJob, {
    db: { executeSql: async (text: string, values: unknown[]) => ({ rows: (await manager.query(text, values)) as unknown[] }) },
  });
}

function closureClock(c: CampaignForResult['clockA']): ClosureClock {
  return {
    id: c.id, name: c.name, site: { id: c.site.id, latitudeDeg: c.site.latitudeDeg, longitudeDeg: c.site.longitudeDeg, ellipsoidalHeightM: c.site.ellipsoidalHeightM },
    budget: { id: c.budget.id, version: c.budget.version, totalUncertainty: c.budget.totalUncertainty },
  };
}

type StoredRow = { id: string; loop_key: string; input_hash: string };

/**
 * Finds the loops among all campaigns with uploaded series, computes the closures whose inputs changed and removes
 * those whose loop no longer exists. One run at a time (transaction-scoped advisory lock). Returns what it did.
 */
export async function recomputeClosures(manager: EntityManager, opts: { now: Date; actor?: Actor | null }): Promise<{ loops: number; computed: number; removed: number; failed: string[] }> {
  await manager.query("SELECT pg_advisory_xact_lock(hashtext('ratio-closures'))");
  const campaigns: { id: string; a: string; b: string; s: Date; e: Date }[] = await manager.query(
    `SELECT c.id, c.clock_a_id AS a, c.clock_b_id AS b, c.period_start AS s, c.period_end AS e FROM campaign c
      WHERE EXISTS (SELECT 1 FROM ratio_series r WHERE r.campaign_id = c.id) ORDER BY c.created_at, c.id`,
  );
  // The loop search orients each loop along its smallest edge id: number the campaigns in creation order so that a
  // loop starts at its oldest campaign, whatever the uuids are.
  const edgeId = (i: number) => String(i).padStart(9, '0');
  const byEdge = new Map(campaigns.map((c, i) => [edgeId(i), c.id]));
  const loops = findClosureLoops(campaigns.map((c, i) => ({ id: edgeId(i), clockA: c.a, clockB: c.b, start: c.s.getTime(), end: c.e.getTime() }))).map((l) => {
    const legs = l.legs.map((x) => ({ campaignId: byEdge.get(x.campaignId)!, sign: x.sign }));
    return { ...l, legs, key: legs.map((x) => x.campaignId).sort().join(',') };
  });
  const stored = new Map<string, StoredRow>(((await manager.query('SELECT id, loop_key, input_hash FROM ratio_closure')) as StoredRow[]).map((r) => [r.loop_key, r]));
  const legCache = new Map<string, { campaign: CampaignForResult; files: Awaited<ReturnType<typeof loadFiles>> }>();
  const inputsOf = async (id: string) => {
    let v = legCache.get(id);
    if (!v) {
      v = { campaign: await getCampaignForResult(manager, id), files: await loadFiles(manager, id) };
      legCache.set(id, v);
    }
    return v;
  };
  let computed = 0;
  const failed: string[] = [];
  const keep = new Set<string>();
  for (const loop of loops) {
    // one leg after the other: `manager` may hold one connection, which takes one query at a time
    const legs: (typeof loop.legs[number] & Awaited<ReturnType<typeof inputsOf>>)[] = [];
    for (const l of loop.legs) legs.push({ ...l, ...(await inputsOf(l.campaignId)) });
    const inputHash = crypto.createHash('sha256').update(JSON.stringify({
      legs: legs.map((l) => [l.campaignId, l.sign, inputHashOf(l.campaign, l.files)]), common: [loop.commonStart, loop.commonEnd], softwareVersion: SOFTWARE_VERSION, revision: 1,
    })).digest('hex');
    const before = stored.get(loop.key);
    if (before && before.input_hash === inputHash) {
      keep.add(loop.key);
      continue;
    }
    const inputs: ClosureLegInput[] = [];
    for (const l of legs) {
      const s = await loadCampaignSamples(manager, l.campaignId, l.files);
      inputs.push({
        campaignId: l.campaignId, campaignName: l.campaign.name, sign: l.sign, clockA: closureClock(l.campaign.clockA), clockB: closureClock(l.campaign.clockB),
        link: { id: l.campaign.link.id, name: l.campaign.link.name, fractionalUncertainty: l.campaign.link.fractionalUncertainty },
        referenceRatio: { value: l.campaign.referenceRatio.value, source: l.campaign.referenceRatio.source }, epochMjd: s.epochMjd, y: s.y, valid: s.valid,
      });
    }
    let r;
    try {
      r = computeClosure(inputs, { commonStartMjd: msToMjd(loop.commonStart), commonEndMjd: msToMjd(loop.commonEnd) });
    } catch (e) {
      // A loop without enough common samples has no closure; it is not stored (and an earlier one is removed).
      if (!(e instanceof ScienceInputError)) throw e;
      failed.push(`${loop.key}: ${e.message}`);
      continue;
    }
    keep.add(loop.key);
    const names = legs.map((l) => (l.sign === 1 ? l.campaign.clockA.name : l.campaign.clockB.name));
    const label = [...names, names[0]].join(' → ');
    const body = { ...r, method: CLOSURE_METHOD, clocks: loop.clocks };
    const values = [loop.key, inputHash, label, new Date(loop.commonStart), new Date(loop.commonEnd), r.closure, r.combinedStandardUncertainty, r.expandedUncertainty, r.coverageFactor, r.en, r.agreed, opts.now, SOFTWARE_VERSION, JSON.stringify(body)];
    const [row]: { id: string }[] = await manager.query(
      `INSERT INTO ratio_closure (loop_key, input_hash, label, common_start, common_end, closure, standard_uncertainty, expanded_uncertainty, coverage_factor, en, agreed, computed_at, software_version, body)
       VALUES ($1,$2,$3,$4,$5,$6,$7,$8,$9,$10,$11,$12,$13,$14)
       ON CONFLICT (loop_key) DO UPDATE SET input_hash = EXCLUDED.input_hash, label = EXCLUDED.label, common_start = EXCLUDED.common_start, common_end = EXCLUDED.common_end,
         closure = EXCLUDED.closure, standard_uncertainty = EXCLUDED.standard_uncertainty, expanded_uncertainty = EXCLUDED.expanded_uncertainty, coverage_factor = EXCLUDED.coverage_factor,
         en = EXCLUDED.en, agreed = EXCLUDED.agreed, computed_at = EXCLUDED.computed_at, software_version = EXCLUDED.software_version, body = EXCLUDED.body
       RETURNING id`,
      values,
    );
    await manager.query('DELETE FROM ratio_closure_campaign WHERE closure_id = $1', [row.id]);
    for (const [i, l] of loop.legs.entries()) {
      await manager.query('INSERT INTO ratio_closure_campaign (closure_id, campaign_id, position, sign) VALUES ($1, $2, $3, $4)', [row.id, l.campaignId, i + 1, l.sign]);
    }
    await recordAudit(manager, opts.actor ?? null, {
      action: 'closure.computed', entityType: 'ratio_closure', entityId: row.id,
      details: { loopKey: loop.key, inputHash, closure: r.closure, U: r.expandedUncertainty, k: r.coverageFactor, en: r.en, agreed: r.agreed },
    });
    computed++;
  }
  const gone = [...stored.values()].filter((s) => !keep.has(s.loop_key));
  if (gone.length) await manager.query('DELETE FROM ratio_closure WHERE id = ANY($1)', [gone.map((g) => g.id)]);
  return { loops: loops.length, computed, removed: gone.length, failed };
}

// ---------------------------------------------------------------- reads

type ClosureRow = {
  id: string; label: string; common_start: Date; common_end: Date; closure: number; standard_uncertainty: number; expanded_uncertainty: number; coverage_factor: number;
  en: number; agreed: boolean; computed_at: Date; input_hash: string; software_version: string; body?: ReturnType<typeof computeClosure> & { method: typeof CLOSURE_METHOD; clocks: string[] };
  members: { campaignId: string; position: number; sign: 1 | -1; state: string; instituteId: string; partnerInstituteId: string | null }[];
};

async function loadClosures(manager: EntityManager, where: string, params: unknown[], withBody: boolean): Promise<ClosureRow[]> {
  return manager.query(
    `SELECT rc.id, rc.label, rc.common_start, rc.common_end, rc.closure, rc.standard_uncertainty, rc.expanded_uncertainty, rc.coverage_factor, rc.en, rc.agreed,
            rc.computed_at, rc.input_hash, rc.software_version, ${withBody ? 'rc.body,' : ''}
            (SELECT json_agg(json_build_object('campaignId', m.campaign_id, 'position', m.position, 'sign', m.sign, 'state', c.state, 'instituteId', c.institute_id, 'partnerInstituteId', kb.institute_id) ORDER BY m.position)
               FROM ratio_closure_campaign m JOIN campaign c ON c.id = m.campaign_id JOIN clock kb ON kb.id = c.clock_b_id WHERE m.closure_id = rc.id) AS members
       FROM ratio_closure rc ${where} ORDER BY rc.common_start, rc.label, rc.id`,
    params,
  );
}

const visibleTo = (actor: Actor, row: { members: readonly CampaignOwnership[] }) => row.members.length > 0 && row.members.every((m) => canSeeCampaign(actor, m));

function toSummary(row: ClosureRow): ClosureSummary {
  return {
    id: row.id, label: row.label, clocks: row.label.split(' → ').slice(0, -1), campaignIds: row.members.map((m) => m.campaignId),
    commonStart: row.common_start.toISOString(), commonEnd: row.common_end.toISOString(), closure: row.closure, standardUncertainty: row.standard_uncertainty,
    expandedUncertainty: row.expanded_uncertainty, coverageFactor: row.coverage_factor, coverageProbability: row.body?.coverageProbability ?? 0.9544997361036416,
    en: row.en, agreed: row.agreed, computedAt: row.computed_at.toISOString(),
  };
}

function toDetail(row: ClosureRow): ClosureDetail {
  const b = row.body!;
  return {
    ...toSummary(row), coverageProbability: b.coverageProbability, inputHash: row.input_hash, softwareVersion: row.software_version,
    legs: b.legs.map((l, i) => ({ position: i + 1, campaignId: l.campaignId, campaignName: l.campaignName, sign: l.sign, fromClock: l.from, toClock: l.to, meanY: l.meanY, referenceRatio: l.referenceRatio })),
    tau0Seconds: b.tau0Seconds, commonSamples: b.commonSamples, sumY: b.sumY, referenceRatioTerm: b.referenceRatioTerm, statisticalUncertainty: b.statisticalUncertainty,
    statisticalMethod: b.statisticalMethod, effectiveDegreesOfFreedom: b.effectiveDegreesOfFreedom, budget: b.budget, series: b.series,
    method: { statement: b.method.statement, sources: [...b.method.sources], assumptions: [...b.method.assumptions], loopSearch: b.method.loopSearch }, cautions: b.cautions,
  };
}

const sorters = new Map<NonNullable<ClosureListQuery['sort']>, (a: ClosureSummary, b: ClosureSummary) => number>([
  ['commonStart', (a, b) => a.commonStart.localeCompare(b.commonStart)],
  ['en', (a, b) => Math.abs(a.en) - Math.abs(b.en)],
  ['label', (a, b) => a.label.localeCompare(b.label)],
]);

const CSV_HEADER = ['closure_id', 'loop', 'common_start_utc', 'common_end_utc', 'closure_epsilon', 'u_epsilon', 'U_epsilon', 'k', 'p', 'En', 'agreed', 'unit', 'computed_at_utc'];
const summaryCells = (s: ClosureSummary) => [s.id, s.label, s.commonStart, s.commonEnd, s.closure, s.standardUncertainty, s.expandedUncertainty, s.coverageFactor, s.coverageProbability, s.en, s.agreed, '1 (dimensionless)', s.computedAt];

export function createClosuresService(dataSource: DataSource) {
  const m = dataSource.manager;
  async function visibleSummaries(actor: Actor): Promise<ClosureSummary[]> {
    return (await loadClosures(m, '', [], false)).filter((r) => visibleTo(actor, r)).map(toSummary);
  }
  async function detail(actor: Actor, id: string): Promise<ClosureDetail> {
    authorize(actor, 'network:read');
    const [row] = await loadClosures(m, 'WHERE rc.id = $1', [id], true);
    if (!row || !visibleTo(actor, row)) throw new NotFound('Closure');
    return toDetail(row);
  }
  return {
    async list(actor: Actor, q: ClosureListQuery): Promise<Page<ClosureSummary>> {
      authorize(actor, 'network:read');
      let items = await visibleSummaries(actor);
      if (q.failing) items = items.filter((s) => s.agreed === (q.failing === 'false'));
      if (q.q) {
        const needle = q.q.toLowerCase();
        items = items.filter((s) => s.label.toLowerCase().includes(needle));
      }
      const sorter = sorters.get(q.sort ?? 'commonStart')!;
      items.sort((a, b) => (q.order === 'desc' ? -sorter(a, b) : sorter(a, b)));
      return { items: items.slice((q.page - 1) * q.pageSize, q.page * q.pageSize), total: items.length, page: q.page, pageSize: q.pageSize };
    },
    async listCsv(actor: Actor): Promise<string> {
      authorize(actor, 'network:read');
      const items = await visibleSummaries(actor);
      return [csvLine(CSV_HEADER), ...items.map((s) => csvLine(summaryCells(s)))].join('');
    },
    detail,
    async exportCsv(actor: Actor, id: string): Promise<string> {
      const d = await detail(actor, id);
      const rows: (string | number | boolean | null)[][] = [
        ['section', 'quantity', 'value', 'standard_uncertainty', 'expanded_uncertainty', 'unit', 'note'],
        ['meta', 'loop', d.label, null, null, '', d.id],
        ['meta', 'common_start_utc', d.commonStart, null, null, '', ''],
        ['meta', 'common_end_utc', d.commonEnd, null, null, '', ''],
        ['meta', 'tau0', d.tau0Seconds, null, null, 's', 'common grid'],
        ['meta', 'common_samples', d.commonSamples, null, null, '1', ''],
        ['meta', 'input_hash_sha256', d.inputHash, null, null, '', ''],
        ['meta', 'software_version', d.softwareVersion, null, null, '', ''],
        ...d.legs.map((l) => ['leg', `${l.position}: ${l.fromClock} → ${l.toClock}`, l.meanY, null, null, '1', `${l.campaignName}; sign ${l.sign > 0 ? '+1' : '−1'}; R0 ${l.referenceRatio}`]),
        ['result', 'sum_s_y', d.sumY, d.statisticalUncertainty, null, '1', 'tide-corrected, over the common samples'],
        ['result', 'sum_s_ln_R0', d.referenceRatioTerm, null, null, '1', 'reference-ratio term'],
        ['result', 'closure_epsilon', d.closure, d.standardUncertainty, d.expandedUncertainty, '1', `k = ${d.coverageFactor}; p = ${d.coverageProbability}`],
        ['result', 'En', d.en, null, null, '1', d.agreed ? '|En| <= 1: closes' : '|En| > 1: does not close'],
        ...d.budget.map((l) => ['budget', l.component, l.sensitivity, l.standardUncertainty, null, '1', `type ${l.type}; contribution ${l.contribution}; ${l.note}`]),
        ['budget', 'coverage_factor_k', d.coverageFactor, null, null, '1', 'k = t_p(ν_eff), JCGM 100:2008 G.4.1, G.6.4'],
        ['budget', 'coverage_probability_p', d.coverageProbability, null, null, '1', ''],
        ['budget', 'effective_degrees_of_freedom', d.effectiveDegreesOfFreedom ?? 'infinite', null, null, '1', 'Welch–Satterthwaite'],
      ];
      return rows.map((r) => csvLine(r)).join('');
    },
    async forCampaign(actor: Actor, campaignId: string): Promise<ClosureSummary[]> {
      authorize(actor, 'campaigns:read');
      const [c]: { state: string; institute_id: string; partner: string | null }[] = await m.query(
        'SELECT c.state, c.institute_id, kb.institute_id AS partner FROM campaign c JOIN clock kb ON kb.id = c.clock_b_id WHERE c.id = $1', [campaignId],
      );
      if (!c || !canSeeCampaign(actor, { state: c.state, instituteId: c.institute_id, partnerInstituteId: c.partner })) throw new NotFound('Campaign');
      const rows = await loadClosures(m, 'WHERE EXISTS (SELECT 1 FROM ratio_closure_campaign x WHERE x.closure_id = rc.id AND x.campaign_id = $1)', [campaignId], false);
      return rows.filter((r) => visibleTo(actor, r)).map(toSummary);
    },
  };
}

/** What a review exception needs of a stored closure: its figures and the campaigns of its loop (for visibility). */
export type ClosureForReview = Pick<ClosureRow, 'label' | 'en' | 'closure' | 'expanded_uncertainty' | 'coverage_factor'> & {
  members: { state: string; instituteId: string; partnerInstituteId: string | null }[];
};

/**
 * The failing stored closures (|E_n| > 1) of the campaign whose id is the SQL expression `campaignId`, oldest common
 * start first, as one JSON array (NULL when there is none): a sub-select for a statement that reads more of the campaign.
 * Clock B's institute is a sub-select rather than a third joined table: less for PostgreSQL to plan on every read.
 */
export const failingClosuresJsonSql = (campaignId: string) => `(SELECT json_agg(json_build_object('label', rc.label, 'en', rc.en, 'closure', rc.closure,
           'expanded_uncertainty', rc.expanded_uncertainty, 'coverage_factor', rc.coverage_factor,
           'members', (SELECT json_agg(json_build_object('state', c.state, 'instituteId', c.institute_id,
                                                         'partnerInstituteId', (SELECT kb.institute_id FROM clock kb WHERE kb.id = c.clock_b_id)) ORDER BY m.position)
                         FROM ratio_closure_campaign m JOIN campaign c ON c.id = m.campaign_id WHERE m.closure_id = rc.id))
         ORDER BY rc.common_start, rc.label, rc.id)
    FROM ratio_closure rc
   WHERE rc.agreed = false AND EXISTS (SELECT 1 FROM ratio_closure_campaign x WHERE x.closure_id = rc.id AND x.campaign_id = ${campaignId}))`;

/** Review exceptions from failing closures, among those the actor may see. */
export function closureExceptionsOf(actor: Actor, rows: readonly ClosureForReview[]): ReviewException[] {
  return rows.filter((r) => visibleTo(actor, r)).map((r) => ({
    code: 'closure-failing' as const,
    text: `The ratio closure ${r.label} fails: Eₙ = ${r.en.toFixed(2)} (|Eₙ| > 1; ε = ${r.closure.toExponential(2)}, U = ${r.expanded_uncertainty.toExponential(2)}, k = ${r.coverage_factor.toFixed(2)}).`,
  }));
}

/** Review exceptions from the stored closures of a campaign that fail (|E_n| > 1), among those the actor may see. */
export async function closureExceptions(manager: EntityManager, actor: Actor, campaignId: string): Promise<ReviewException[]> {
  const rows = await loadClosures(manager, 'WHERE rc.agreed = false AND EXISTS (SELECT 1 FROM ratio_closure_campaign x WHERE x.closure_id = rc.id AND x.campaign_id = $1)', [campaignId], false);
  return closureExceptionsOf(actor, rows);
}

export type { FoundLoop };
