import type { JobProgress } from '../../shared/jobs';
import crypto from 'node:crypto';
import type { DataSource, EntityManager } from 'typeorm';
import type { PageQuery } from '../../shared/http';
import {
  adjustmentOptionsSchema, type AdjustmentOptionsInput, type AdjustmentRun, type AdjustmentRunDetail, type AdjustmentRunOptions,
  type CalcAdjustBody, type CalcAdjustResult, type NetworkMap, type Reconciliation, type RunResult,
} from '../../shared/network';
import { recordAudit } from '../audit/audit.service';
import type { Actor } from '../auth/actor';
import { authorize } from '../auth/permissions';
import { AdjustmentRunEntity, BenchmarkEntity, HeightDatumEntity, type AdjustmentRunRow } from '../db/entities/network.entities';
import { faultPoint } from '../dev/fault-point';
import { AppError, Invalid, NotFound } from '../http/errors';
import { adjustNetwork, AdjustmentInputError, type AdjustmentInput, type NetworkObservation, type NetworkPoint } from '../science/adjustment/gauss-markov';
import { normalisedError } from '../science/agreement';
import { normalGravityAtHeight } from '../science/normal-gravity';
import { convertPotential, potentialShiftFromMeanTide } from '../science/tides';
import { datumOffsetTerms } from '../science/adjustment/datum-offsets';
import { loadSectionsWithBenchmarks } from './network.service';
import { clockDeltaCFor, loadAcceptedCampaigns, loadLinks, loadSites } from './registry-bridge';
import { canSeeCampaign } from '../auth/campaign-scope';
import { canSeeChain, computeChain, loadAcceptedChains } from '../chains/chain-compute';
import { computeRunResult } from './run-result';
import { AdjustmentThreadStopped, runInThread } from './adjustment-thread';
import { readProgress, throttledProgress, writeProgress } from '../jobs/progress';

export { computeRunResult };

// Adjustment runs: gather the inputs (sections, site ties, accepted clock comparisons), store them with the options in
// an immutable run row, let a pg-boss worker adjust them (server/jobs/worker.ts), and read the results back for the
// run pages, the reconciliation of clocks with levelling and the map.

export class NetworkNotConnected extends AppError {
  constructor(message: string, parts: { codes: string[]; count: number }[]) {
    super(422, 'network-not-connected', 'Part of the network has no datum', message, { parts });
  }
}

/** Floor for a local tie entered with zero uncertainty: 0.1 mm (common practice; a weight needs σ > 0). */
const TIE_SIGMA_FLOOR_M = 1e-4;

type PointMeta = { kind: 'benchmark' | 'site'; label: string; datumName: string | null; latitudeDeg: number };
type ObservationMeta = { label: string };
export type StoredInputs = {
  adjustment: AdjustmentInput;
  pointMeta: Record<string, PointMeta>;
  observationMeta: Record<string, ObservationMeta>;
  clockCampaigns: { campaignId: string; observationId: string; crossesDatums: boolean }[];
  /** Labels of the shared parameters (clock budget versions, links, reference ratios). */
  sharedLabels?: Record<string, string>;
  referenceDatum?: string | null;
  tideConversions?: { label: string; from: TideSystem; to: TideSystem; shift_m2s2: number; pointCode?: string }[];
  excluded?: { label: string; reason: string }[];
  /** What entered the run: clocks, campaigns (directly or through a chain), calibration chains, ratio closures. */
  entered?: RunEntered;
};
export type RunEntered = NonNullable<RunResult['entered']>;

export const sitePoint = (siteId: string) => `site:${siteId}`;

/** A site's display name, with its institute code in front unless the name already starts with it. */
export const siteLabel = (site: { name: string; instituteCode: string }) =>
  site.name.toLowerCase().startsWith(site.instituteCode.toLowerCase()) ? site.name : `${site.instituteCode} ${site.name}`;

/**
 * Which points the levelling itself joins (sections and local ties, union–find over a run's observations). Two sites in
 * different datums that no levelling joins have a levelled ΔC holding the unknown offset between the datums.
 */
export function levellingComponents(observations: RunResult['observations']): (a: string, b: string) => boolean {
  const parent = new Map<string, string>();
  const find = (x: string): string => {
    let r = x;
    while (parent.has(r) && parent.get(r) !== r) r = parent.get(r)!;
    let c = x;
    while (c !== r) { const n = parent.get(c) ?? r; parent.set(c, r); c = n; }
    return r;
  };
  for (const o of observations) {
    // Observations that data snooping removed do not join anything.
    if (o.kind === 'clock' || o.suspected) continue;
    if (!parent.has(o.from)) parent.set(o.from, o.from);
    if (!parent.has(o.to)) parent.set(o.to, o.to);
    parent.set(find(o.from), find(o.to));
  }
  return (a, b) => parent.has(a) && parent.has(b) && find(a) === find(b);
}

/** A fixed benchmark whose known value states no tide system: the run is refused until someone states it. */
export class TideSystemUnknown extends AppError {
  constructor(message: string, items: string[]) {
    super(422, 'tide-system-unknown', 'Tide system not stated', message, { items });
  }
}

type TideSystem = 'mean-tide' | 'zero-tide' | 'tide-free';

/** Gathers the network as it is now into adjustment input (pure data, stored with the run). */
export async function gatherInputs(m: EntityManager, options: AdjustmentRunOptions): Promise<StoredInputs> {
  const benchmarks = await m.getRepository(BenchmarkEntity).find({ where: { state: 'in-use' }, relations: { datum: true }, order: { code: 'ASC' } });
  const inUse = new Map(benchmarks.map((b) => [b.code, b]));
  const sections = (await loadSectionsWithBenchmarks(m)).filter((s) => inUse.has(s.fromBenchmark!.code) && inUse.has(s.toBenchmark!.code));
  // Keyed by benchmark codes people type: prototype-less so a code like `__proto__` is an ordinary key.
  const pointMeta = Object.create(null) as Record<string, PointMeta>;
  const observationMeta = Object.create(null) as Record<string, ObservationMeta>;
  const tideConversions: NonNullable<StoredInputs['tideConversions']> = [];
  const excluded: NonNullable<StoredInputs['excluded']> = [];
  const unknownTide: string[] = [];
  // Fixed benchmarks first, so the 'minimum' constraint holds a fixed benchmark.
  const ordered = [...benchmarks].sort((a, b) => Number(b.fixed) - Number(a.fixed) || a.code.localeCompare(b.code));
  const points: NetworkPoint[] = ordered.map((b) => {
    pointMeta[b.code] = { kind: 'benchmark', label: `${b.code} ${b.name}`, datumName: b.datum?.name ?? null, latitudeDeg: b.latitudeDeg };
    if (!(b.fixed && b.knownC_m2s2 !== null)) return { code: b.code };
    // The fixed value enters in its datum's tide system (Ekman 1989; Mäkinen & Ihde 2009): converted if stated otherwise.
    const datumSystem = b.datum?.tideSystem ?? null;
    const valueSystem = b.knownTideSystem ?? null;
    if (valueSystem === null || datumSystem === null) {
      unknownTide.push(b.code);
      return { code: b.code, fixedC: b.knownC_m2s2 };
    }
    if (valueSystem === datumSystem) return { code: b.code, fixedC: b.knownC_m2s2 };
    const converted = convertPotential(b.knownC_m2s2, b.latitudeDeg, valueSystem, datumSystem);
    tideConversions.push({ label: `fixed value of ${b.code} (datum ${b.datum?.name})`, from: valueSystem, to: datumSystem, shift_m2s2: converted - b.knownC_m2s2, pointCode: b.code });
    return { code: b.code, fixedC: converted };
  });
  const sigmaPerSqrtKm_m = options.sigmaMmPerSqrtKm / 1000;
  const observations: NetworkObservation[] = sections.map((s) => {
    const id = `section:${s.id}`;
    observationMeta[id] = { label: `${s.lineName ? `${s.lineName}: ` : ''}${s.fromBenchmark!.code} → ${s.toBenchmark!.code}` };
    return {
      id, kind: 'levelling', from: s.fromBenchmark!.code, to: s.toBenchmark!.code,
      deltaC: s.meanGravity_ms2 * s.deltaHeightM, sigma: sigmaPerSqrtKm_m * Math.sqrt(s.lengthKm) * s.meanGravity_ms2,
    };
  });

  // Sites enter as pseudo-points tied to their benchmark: C_site − C_bm = γ·Δh_tie (the tie is metres of height).
  const sites = await loadSites(m);
  const siteDatum = new Map<string, { name: string | null; system: TideSystem | null; latitudeDeg: number }>();
  for (const site of sites) {
    const bm = site.benchmarkCode ? inUse.get(site.benchmarkCode) : undefined;
    if (!bm || (site.tieHeightDifferenceM === null && site.tieDeltaC_m2s2 === null)) continue;
    const code = sitePoint(site.id);
    const g = normalGravityAtHeight(site.latitudeDeg, bm.knownNormalHeightM ?? bm.ellipsoidalHeightM);
    points.push({ code });
    pointMeta[code] = { kind: 'site', label: siteLabel(site), datumName: bm.datum?.name ?? null, latitudeDeg: site.latitudeDeg };
    siteDatum.set(site.id, { name: bm.datum?.name ?? null, system: bm.datum?.tideSystem ?? null, latitudeDeg: site.latitudeDeg });
    const id = `tie:${site.id}`;
    observationMeta[id] = { label: `local tie ${bm.code} → ${siteLabel(site)}` };
    // A tie given as ΔC is used as it stands (C = W₀ − W: ΔC = C_site − C_bm); one given as Δh becomes γ·Δh.
    const tie = site.tieDeltaC_m2s2 !== null
      ? { deltaC: site.tieDeltaC_m2s2, sigma: Math.max(site.tieUncertaintyC_m2s2 ?? 0, g * TIE_SIGMA_FLOOR_M) }
      : { deltaC: g * site.tieHeightDifferenceM!, sigma: g * Math.max(site.tieUncertaintyM ?? 0, TIE_SIGMA_FLOOR_M) };
    observations.push({ id, kind: 'tie', from: bm.code, to: code, ...tie });
  }

  // Reference datum for the offsets: the datum of the first fixed benchmark that the levelling reaches.
  const levelled = new Set(observations.flatMap((o) => [o.from, o.to]));
  const referenceDatum = ordered.find((b) => b.fixed && levelled.has(b.code))?.datum?.name ?? null;

  const clockCampaigns: StoredInputs['clockCampaigns'] = [];
  const offsets = new Set<string>();
  const shared = new Map<string, { sigma: number; label: string }>();
  const entered: RunEntered = { clocks: [], campaigns: [], chains: [], closures: [] };
  if (options.includeClocks) {
    // Accepted calibration chains first: each is one observation, and the campaigns it uses do not enter again.
    const viaChain = new Map<string, string>();
    for (const ch of await loadAcceptedChains(m)) {
      const id = `chain:${ch.row.id}`;
      let r;
      try {
        r = await computeChain(m, ch.row, ch.campaigns);
      } catch (e) {
        excluded.push({ label: `calibration chain ${ch.row.name}`, reason: e instanceof Error ? e.message : String(e) });
        continue;
      }
      const da = siteDatum.get(r.fromSite.id);
      const db = siteDatum.get(r.toSite.id);
      if (!da || !db) {
        excluded.push({ label: `calibration chain ${ch.row.name}`, reason: 'a site of the chain has no local tie to a benchmark of the network' });
        continue;
      }
      if (da.system === null || db.system === null) {
        excluded.push({ label: `calibration chain ${ch.row.name}`, reason: 'the tide system of a datum is not stated' });
        continue;
      }
      // The chain's ΔC is mean-tide (its comparisons' results are); converted to each end's datum system as for campaigns.
      const shift = potentialShiftFromMeanTide(db.system, db.latitudeDeg) - potentialShiftFromMeanTide(da.system, da.latitudeDeg);
      if (shift !== 0) tideConversions.push({ label: `calibration chain ${ch.row.name}`, from: 'mean-tide', to: da.system === db.system ? da.system : db.system, shift_m2s2: shift });
      const terms: NonNullable<NetworkObservation['terms']> = r.shared.map((t) => ({ name: t.key, coefficient: t.coefficient }));
      for (const t of r.shared) if (!shared.has(t.key)) shared.set(t.key, { sigma: t.sigma_m2s2, label: t.label });
      const ob: NetworkObservation = { id, kind: 'clock', from: sitePoint(r.fromSite.id), to: sitePoint(r.toSite.id), deltaC: r.deltaC_m2s2.value + shift, sigma: Math.max(r.own_m2s2, 0.01 * r.deltaC_m2s2.standardUncertainty), terms };
      // (Floor: 1 % of u_c keeps a weight when everything is shared, as for campaigns.)
      if (da.name !== db.name && options.datumOffsets && referenceDatum !== null && da.name !== null && db.name !== null) {
        const offsetTerms = datumOffsetTerms(da.name, db.name, referenceDatum);
        for (const t of offsetTerms) offsets.add(t.name);
        ob.terms = [...offsetTerms, ...terms];
      }
      observationMeta[id] = { label: `calibration chain ${ch.row.name}` };
      observations.push(ob);
      entered.chains.push({ id: ch.row.id, name: ch.row.name, observationId: id, campaignIds: r.inputs.map((x) => x.campaignId) });
      for (const x of r.inputs) {
        viaChain.set(x.campaignId, ch.row.id);
        entered.campaigns.push({ id: x.campaignId, name: x.campaign, via: 'chain', chainId: ch.row.id });
      }
    }
    for (const c of await loadAcceptedCampaigns(m)) {
      if (viaChain.has(c.id)) continue;
      if (!siteDatum.has(c.siteAId) || !siteDatum.has(c.siteBId)) continue;
      if (clockCampaigns.some((x) => x.campaignId === c.id)) continue;
      if (c.siteAId === c.siteBId) {
        excluded.push({ label: `clock comparison ${c.name}`, reason: 'side by side at one site: it measures the offset between the clocks, not a potential difference (it enters through a calibration chain)' });
        continue;
      }
      const dc = await clockDeltaCFor(m, c.id);
      if (!dc) continue;
      const da = siteDatum.get(c.siteAId)!;
      const db = siteDatum.get(c.siteBId)!;
      if (dc.tideSystem === null || da.system === null || db.system === null) {
        excluded.push({ label: `clock comparison ${c.name}`, reason: 'the tide system of the clock result or of a datum is not stated; state it to include this campaign' });
        continue;
      }
      const crosses = da.name !== db.name;
      const id = `clock:${c.id}`;
      // The clock ΔC is stated in its result's tide system; the levelling in each datum's. Convert the clock ΔC to the
      // systems of the two ends (Ekman 1989; Mäkinen & Ihde 2009): ΔC' = ΔC − [s_clk(B) − s_clk(A)] + [s_B(B) − s_A(A)].
      const shift = potentialShiftFromMeanTide(db.system, db.latitudeDeg) - potentialShiftFromMeanTide(da.system, da.latitudeDeg)
        - (potentialShiftFromMeanTide(dc.tideSystem, db.latitudeDeg) - potentialShiftFromMeanTide(dc.tideSystem, da.latitudeDeg));
      if (dc.tideSystem !== da.system || dc.tideSystem !== db.system) {
        tideConversions.push({
          label: da.system === db.system ? `clock comparison ${c.name}` : `clock comparison ${c.name} (to ${da.system} at the from end, ${db.system} at the to end)`,
          from: dc.tideSystem, to: da.system === db.system ? da.system : db.system, shift_m2s2: shift,
        });
      }
      // Shared systematic terms are parameters; the observation keeps its own part only.
      const terms: NonNullable<NetworkObservation['terms']> = dc.shared.map((t) => ({ name: t.name, coefficient: t.coefficient }));
      for (const t of dc.shared) if (!shared.has(t.name)) shared.set(t.name, { sigma: t.sigma_m2s2, label: t.label });
      const ob: NetworkObservation = { id, kind: 'clock', from: sitePoint(c.siteAId), to: sitePoint(c.siteBId), deltaC: dc.deltaC_m2s2 + shift, sigma: dc.ownUncertainty_m2s2, terms };
      if (crosses && options.datumOffsets && referenceDatum !== null && da.name !== null && db.name !== null) {
        // One offset per datum relative to the reference datum (C in datum d − C in the reference), so loops close.
        const offsetTerms = datumOffsetTerms(da.name, db.name, referenceDatum);
        for (const t of offsetTerms) offsets.add(t.name);
        ob.terms = [...offsetTerms, ...terms];
      }
      observationMeta[id] = { label: `clock comparison ${c.name}` };
      observations.push(ob);
      clockCampaigns.push({ campaignId: c.id, observationId: id, crossesDatums: crosses });
      entered.campaigns.push({ id: c.id, name: c.name, via: 'direct', chainId: null });
    }
    entered.clocks = await clocksOf(m, entered.campaigns.map((c) => c.id));
    entered.closures = await closuresOf(m, entered.campaigns.map((c) => c.id));
  }
  // A benchmark no section reaches carries no information; leaving it out keeps it from counting as a datum-less part.
  const used = new Set(observations.flatMap((o) => [o.from, o.to]));
  const kept = points.filter((p) => used.has(p.code));
  for (const code of Object.keys(pointMeta)) if (!used.has(code)) delete pointMeta[code];
  const unknownUsed = unknownTide.filter((code) => used.has(code));
  if (unknownUsed.length) {
    throw new TideSystemUnknown(
      `The fixed value of ${unknownUsed.join(', ')} states no tide system (or its datum does). Edit the benchmark and say whether the value is mean-tide, zero-tide or tide-free; it is never assumed.`,
      unknownUsed,
    );
  }
  const keptConversions = tideConversions.filter((t) => t.pointCode === undefined || used.has(t.pointCode));
  // Adjusted differences for every pair of sites a fibre link joins: σ from the full covariance.
  const differences = (await loadLinks(m))
    .filter((l) => used.has(sitePoint(l.siteAId)) && used.has(sitePoint(l.siteBId)))
    .map((l) => ({ from: sitePoint(l.siteAId), to: sitePoint(l.siteBId) }));
  return {
    adjustment: {
      points: kept, observations,
      options: {
        alpha: options.alpha, alphaSnooping: options.alphaSnooping, constraint: options.constraint, datumOffsets: [...offsets],
        sharedParameters: [...shared].map(([name, v]) => ({ name, sigma: v.sigma })), differences,
      },
    },
    pointMeta, observationMeta, clockCampaigns,
    sharedLabels: Object.fromEntries([...shared].map(([name, v]) => [name, v.label])),
    referenceDatum, tideConversions: keptConversions, excluded, entered,
  };
}

/** The clocks of the campaigns that entered a run (each once, by name). */
async function clocksOf(m: EntityManager, campaignIds: string[]): Promise<RunEntered['clocks']> {
  if (campaignIds.length === 0) return [];
  const rows: { id: string; name: string; n: string }[] = await m.query(`
    SELECT k.id, k.name, count(*)::text AS n FROM campaign c JOIN clock k ON k.id IN (c.clock_a_id, c.clock_b_id)
    WHERE c.id = ANY($1::uuid[]) GROUP BY k.id, k.name ORDER BY k.name`, [campaignIds]);
  return rows.map((r) => ({ id: r.id, name: r.name, campaigns: Number(r.n) }));
}

/**
 * The stored ratio closures whose every campaign entered the run: checks of the clock inputs (a closure is not an
 * observation of the adjustment; it tests that the ratios the campaigns contribute are consistent around a loop).
 */
async function closuresOf(m: EntityManager, campaignIds: string[]): Promise<RunEntered['closures']> {
  if (campaignIds.length === 0) return [];
  const rows: { id: string; name: string; en: number; agreed: boolean }[] = await m.query(`
    SELECT rc.id, rc.label AS name, rc.en, rc.agreed FROM ratio_closure rc
     WHERE NOT EXISTS (SELECT 1 FROM ratio_closure_campaign x WHERE x.closure_id = rc.id AND NOT (x.campaign_id = ANY($1::uuid[])))
     ORDER BY rc.label`, [campaignIds]);
  return rows.map((r) => ({ id: r.id, name: r.name, en: r.en, agreed: r.agreed }));
}

/** Parts of the network that no datum point reaches (union–find); checked before a run is queued. */
export function partsWithoutDatum(input: AdjustmentInput): { codes: string[]; count: number }[] {
  const idx = new Map(input.points.map((p, i) => [p.code, i]));
  const parent = input.points.map((_, i) => i);
  const find = (i: number): number => {
    while (parent[i] !== i) i = parent[i] = parent[parent[i]];
    return i;
  };
  for (const o of input.observations) {
    const a = idx.get(o.from);
    const b = idx.get(o.to);
    if (a !== undefined && b !== undefined) parent[find(a)] = find(b);
  }
  const minimum = input.options?.constraint === 'minimum';
  const firstFixed = input.points.findIndex((p) => p.fixedC !== undefined);
  const anchored = new Set<number>();
  input.points.forEach((p, i) => {
    if (minimum ? i === firstFixed : p.fixedC !== undefined) anchored.add(find(i));
  });
  // Datum offsets tie two parts together only through the offset itself, which they also estimate: no help.
  const parts = new Map<number, string[]>();
  input.points.forEach((p, i) => {
    const r = find(i);
    if (anchored.has(r)) return;
    const list = parts.get(r) ?? [];
    list.push(p.code);
    parts.set(r, list);
  });
  return [...parts.values()].map((codes) => ({ codes: codes.slice(0, 8), count: codes.length }));
}

function describeParts(parts: { codes: string[]; count: number }[]) {
  return parts.map((p) => `${p.codes.join(', ')}${p.count > p.codes.length ? ` (+${p.count - p.codes.length} more)` : ''}`).join('; ');
}

const fmtShift = (v: number) => `${v >= 0 ? '+' : '−'}${Math.abs(v).toFixed(3)} m²/s²`;

export function toRunDto(r: AdjustmentRunRow): AdjustmentRun {
  return {
    id: r.id, state: r.state, progress: r.progress, stage: r.stage,
    options: adjustmentOptionsSchema.parse(r.options),
    inputSummary: r.inputSummary as AdjustmentRun['inputSummary'],
    error: (r.error as AdjustmentRun['error']) ?? null,
    createdBy: r.createdBy, createdAt: r.createdAt.toISOString(),
    startedAt: r.startedAt?.toISOString() ?? null, finishedAt: r.finishedAt?.toISOString() ?? null,
    sigma0: r.sigma0, degreesOfFreedom: r.degreesOfFreedom, globalTestPassed: r.globalTestPassed, suspects: r.suspects,
  };
}

/** The job body: executes one queued run and stores its result or its failure; never leaves it 'running'. */
export async function executeRun(dataSource: DataSource, runId: string) {
  const repo = dataSource.getRepository(AdjustmentRunEntity);
  // The inputs as text: parsed in the adjustment thread, not on this event loop.
  const [run] = (await dataSource.query('SELECT state, inputs::text AS inputs FROM adjustment_run WHERE id = $1', [runId])) as { state: string; inputs: string }[];
  if (!run || run.state === 'done' || run.state === 'failed') return;
  // Progress goes to job_progress (kind 'adjustment-run') and to the run row, which the run pages read.
  const write = async (fraction: number, stage: string) => {
    await writeProgress(dataSource, 'adjustment-run', runId, stage, fraction);
    await repo.update({ id: runId, state: 'running' }, { progress: fraction, stage });
  };
  await repo.update({ id: runId }, { state: 'running', startedAt: new Date(), progress: 0.02, stage: 'loading inputs' });
  await writeProgress(dataSource, 'adjustment-run', runId, 'loading inputs', 0.02);
  await faultPoint('adjustment-run'); // test-only kill point (server/dev/fault-point.ts); a no-op unless armed
  const progress = throttledProgress(write, PROGRESS_INTERVAL_MS);
  try {
    const { resultJson, summary } = await runInThread(run.inputs, (fraction, stage) => progress.report(0.05 + 0.85 * fraction, stage));
    await progress.flush();
    await write(0.95, 'storing results');
    await dataSource.query(
      `UPDATE adjustment_run SET state = 'done', progress = 1, stage = 'finished', result = $2::jsonb, finished_at = now(),
         sigma0 = $3, degrees_of_freedom = $4, global_test_passed = $5, suspects = $6 WHERE id = $1`,
      [runId, resultJson, summary.sigma0, summary.degreesOfFreedom, summary.globalTestPassed, summary.suspects],
    );
    await writeProgress(dataSource, 'adjustment-run', runId, 'finished', 1);
  } catch (e) {
    await progress.flush();
    // A thread stopped with its worker: the job fails and is retried; the run stays open for the retry.
    if (e instanceof AdjustmentThreadStopped) throw e;
    const error = e instanceof AdjustmentInputError
      ? { message: e.message, reason: e.detail.reason, ...(e.detail.parts ? { parts: e.detail.parts } : {}) }
      : { message: e instanceof Error ? e.message : String(e) };
    await repo.update({ id: runId }, { state: 'failed', stage: 'failed', error: error as never, finishedAt: new Date() });
    await writeProgress(dataSource, 'adjustment-run', runId, 'failed', 1, error.message);
  }
}

/** Progress of a run is written at most this often (ms); the thread reports about every 100 ms. */
const PROGRESS_INTERVAL_MS = 250;

export type Enqueue = (runId: string) => Promise<void>;

export function createAdjustmentService(dataSource: DataSource) {
  async function latestDone(m: EntityManager, withClocks: boolean | null): Promise<AdjustmentRunRow | null> {
    const qb = m.getRepository(AdjustmentRunEntity).createQueryBuilder('r').where("r.state = 'done'").orderBy('r.finished_at', 'DESC').addOrderBy('r.created_at', 'DESC');
    if (withClocks !== null) qb.andWhere(`(r.options->>'includeClocks')::boolean = :w`, { w: withClocks });
    return qb.getOne();
  }

  return {
    /** Stores a queued run with its inputs and options and hands it to the queue; returns at once (202). */
    async createRun(actor: Actor, optionsIn: AdjustmentOptionsInput, enqueue: Enqueue): Promise<AdjustmentRun> {
      authorize(actor, 'network:write');
      const options = adjustmentOptionsSchema.parse(optionsIn);
      const row = await dataSource.transaction(async (m) => {
        const inputs = await gatherInputs(m, options);
        if (inputs.adjustment.observations.length === 0) throw new Invalid('There are no levelling sections to adjust.', [{ path: 'body', message: 'no observations' }]);
        const parts = partsWithoutDatum(inputs.adjustment);
        if (parts.length) {
          throw new NetworkNotConnected(`These parts of the network reach no fixed benchmark: ${describeParts(parts)}. Fix a benchmark in each part or connect it.`, parts);
        }
        const json = JSON.stringify(inputs);
        const count = (k: string) => inputs.adjustment.observations.filter((o) => o.kind === k).length;
        const saved = await m.getRepository(AdjustmentRunEntity).save({
          state: 'queued', progress: 0, stage: 'queued', options: options as never, inputs: inputs as never,
          inputSummary: {
            benchmarks: Object.values(inputs.pointMeta).filter((p) => p.kind === 'benchmark').length,
            sections: count('levelling'), ties: count('tie'), clocks: count('clock'),
            inputSha256: crypto.createHash('sha256').update(json).digest('hex'),
          },
          createdBy: actor.userId,
        });
        await recordAudit(m, actor, { action: 'adjustment-run.queued', entityType: 'adjustment-run', entityId: saved.id, details: { options, inputSha256: saved.inputSummary.inputSha256 } });
        return saved;
      });
      await enqueue(row.id);
      return toRunDto(row);
    },
    async listRuns(actor: Actor, q: PageQuery) {
      authorize(actor, 'network:read');
      const [rows, total] = await dataSource.getRepository(AdjustmentRunEntity).findAndCount({
        select: { id: true, state: true, progress: true, stage: true, options: true, inputSummary: true, error: true, createdBy: true, createdAt: true, startedAt: true, finishedAt: true, sigma0: true, degreesOfFreedom: true, globalTestPassed: true, suspects: true },
        order: { createdAt: 'DESC' }, skip: (q.page - 1) * q.pageSize, take: q.pageSize,
      });
      return { items: rows.map(toRunDto), total, page: q.page, pageSize: q.pageSize };
    },
    /** The run's durable progress (stage and fraction in its row, written by the worker as it goes). Reads only. */
    async runProgress(actor: Actor, id: string): Promise<JobProgress> {
      authorize(actor, 'network:read');
      const r = await dataSource.getRepository(AdjustmentRunEntity).findOne({ where: { id }, select: { id: true, state: true, stage: true, progress: true, error: true, createdAt: true, startedAt: true, finishedAt: true } });
      if (!r) throw new NotFound('Adjustment run');
      const open = r.state === 'queued' || r.state === 'running';
      const error = r.error ? String((r.error as { message?: unknown }).message ?? JSON.stringify(r.error)) : null;
      // While it runs, the worker's durable progress row (written about every 250 ms) says how far and when.
      const live = r.state === 'running' ? await readProgress(dataSource, 'adjustment-run', id) : null;
      return {
        state: r.state as JobProgress['state'], stage: live?.stage ?? r.stage ?? r.state, fraction: Math.min(1, Math.max(0, Number(live?.fraction ?? r.progress ?? 0))),
        updatedAt: (live?.updated_at ?? r.finishedAt ?? r.startedAt ?? r.createdAt).toISOString(), error, retryAfterSeconds: open ? 1 : null,
      };
    },
    async getRun(actor: Actor, id: string): Promise<AdjustmentRunDetail> {
      authorize(actor, 'network:read');
      const r = await dataSource.getRepository(AdjustmentRunEntity).findOneBy({ id });
      if (!r) throw new NotFound('Adjustment run');
      const result = (r.result as RunResult | null) ?? null;
      if (!result || actor.role !== 'operator') return { ...toRunDto(r), result };
      // A run with clock observations holds other institutes' campaigns (label, ΔC, residual): an operator gets the
      // network's adjusted points, and of the clock observations only those of campaigns they may see.
      const seen = new Set((await loadAcceptedCampaigns(dataSource.manager)).filter((c) => canSeeCampaign(actor, c)).map((c) => c.id));
      const visible = new Set([...seen].map((id) => `clock:${id}`));
      // A chain is shown when every campaign it uses is (side-by-side ones included).
      for (const ch of await loadAcceptedChains(dataSource.manager)) {
        if (!canSeeChain(actor, ch.campaigns)) continue;
        visible.add(`chain:${ch.row.id}`);
        for (const c of [ch.campaigns.remote, ch.campaigns.before, ch.campaigns.after]) if (c) seen.add(c.id);
      }
      const shown = (o: { id: string }) => !(o.id.startsWith('clock:') || o.id.startsWith('chain:')) || visible.has(o.id);
      const entered = result.entered && {
        ...result.entered,
        campaigns: result.entered.campaigns.filter((c) => seen.has(c.id)),
        chains: result.entered.chains.filter((c) => visible.has(c.observationId)),
      };
      return {
        ...toRunDto(r),
        result: { ...result, entered, observations: result.observations.filter(shown), snooping: { ...result.snooping, suspects: result.snooping.suspects.filter(shown) } },
      };
    },

    async reconciliation(actor: Actor): Promise<Reconciliation> {
      authorize(actor, 'network:read');
      const m = dataSource.manager;
      const levelling = await latestDone(m, false);
      const withClocks = await latestDone(m, true);
      // The same campaign scoping as the campaign pages: an operator sees only their own institute's campaigns here.
      const campaigns = (await loadAcceptedCampaigns(m)).filter((c) => canSeeCampaign(actor, c));
      const links = new Map((await loadLinks(m)).map((l) => [l.id, l]));
      const sites = new Map((await loadSites(m)).map((s) => [s.id, s]));
      const datumSystem = new Map((await m.getRepository(HeightDatumEntity).find()).map((d) => [d.name, d.tideSystem as TideSystem]));
      const lv = levelling?.result as RunResult | null;
      const byCode = new Map(lv?.points.map((p) => [p.code, p]) ?? []);
      const connected = levellingComponents(lv?.observations ?? []);
      const scale = lv?.sigmaScale?.applied ? lv.sigmaScale.factor : 1;
      const diffOf = (from: string, to: string) => {
        for (const d of lv?.differences ?? []) {
          if (d.from === from && d.to === to) return d;
          if (d.from === to && d.to === from) return { ...d, from, to, deltaC_m2s2: -d.deltaC_m2s2 };
        }
        return null;
      };
      const rows: Reconciliation['rows'] = [];
      // Accepted calibration chains are rows of their own (source 'chain'), shown when every campaign they use is.
      type Item = { source: 'campaign' | 'chain'; c: { id: string; name: string; linkId: string; siteAId: string; siteBId: string }; dc?: { deltaC_m2s2: number; standardUncertainty_m2s2: number; tideSystem: TideSystem | null }; expandedU?: number };
      const items: Item[] = campaigns.map((c) => ({ source: 'campaign', c }));
      for (const ch of await loadAcceptedChains(m)) {
        if (!canSeeChain(actor, ch.campaigns)) continue;
        try {
          const r = await computeChain(m, ch.row, ch.campaigns);
          items.push({
            source: 'chain', c: { id: ch.row.id, name: ch.row.name, linkId: ch.campaigns.remote.linkId, siteAId: r.fromSite.id, siteBId: r.toSite.id },
            dc: { deltaC_m2s2: r.deltaC_m2s2.value, standardUncertainty_m2s2: r.deltaC_m2s2.standardUncertainty, tideSystem: r.tideSystem },
            expandedU: r.deltaC_m2s2.expandedUncertainty,
          });
        } catch {
          // A chain whose campaigns have no result yet has nothing to compare.
        }
      }
      for (const item of items) {
        const c = item.c;
        const dc = item.dc ?? await clockDeltaCFor(m, c.id);
        if (!dc) continue;
        const a = byCode.get(sitePoint(c.siteAId));
        const b = byCode.get(sitePoint(c.siteBId));
        const siteA = sites.get(c.siteAId);
        const siteB = sites.get(c.siteBId);
        // Campaigns: k = 2; a chain: its own k = t_p(ν_eff).
        const clockU = item.expandedU ?? 2 * dc.standardUncertainty_m2s2;
        let levellingDeltaC: number | null = null;
        let levellingSigma: number | null = null;
        let sigmaIgnoringCov: number | null = null;
        let sigmaMethod: Reconciliation['rows'][number]['levellingSigmaMethod'] = null;
        let note: string | null = null;
        if (a && b) {
          const d = diffOf(a.code, b.code);
          levellingDeltaC = b.c_m2s2 - a.c_m2s2;
          if (d) {
            // σ² = q_AA + q_BB − 2q_AB from the adjustment (the covariance of the two adjusted sites).
            levellingSigma = d.sigma_m2s2 * scale;
            sigmaIgnoringCov = d.sigmaIgnoringCovariance_m2s2 * scale;
            sigmaMethod = 'covariance';
          } else {
            // A run stored before differences were kept: the root-sum-square neglects the covariance. Re-run to replace it.
            levellingSigma = Math.hypot(a.sigmaC_m2s2, b.sigmaC_m2s2) * scale;
            sigmaIgnoringCov = levellingSigma;
            sigmaMethod = 'root-sum-square';
            note = 'this levelling run predates covariance-based differences: σ is the root-sum-square of the two sites (covariance neglected); start a new run';
          }
        } else note = lv ? 'a site of this link has no local tie to a benchmark of the adjusted network' : 'no levelling-only adjustment run yet';
        const levellingU = levellingSigma === null ? null : 2 * levellingSigma;
        const crosses = !!(a && b && a.datumName !== b.datumName);
        // Tide systems: the clock result's and each datum's; compared in the datums' system when both agree, else in the clock's.
        const sysA = a?.datumName ? datumSystem.get(a.datumName) ?? null : null;
        const sysB = b?.datumName ? datumSystem.get(b.datumName) ?? null : null;
        let tide: Reconciliation['rows'][number]['tide'] = null;
        let tideKnown = true;
        let clockCompared = dc.deltaC_m2s2;
        let levellingCompared = levellingDeltaC;
        if (a && b) {
          if (dc.tideSystem === null || sysA === null || sysB === null) {
            tideKnown = false;
          } else {
            const shift = (sys: TideSystem, at: { latitudeDeg: number }) => potentialShiftFromMeanTide(sys, at.latitudeDeg);
            const system = sysA === sysB ? sysA : dc.tideSystem;
            const clockShift = shift(system, b) - shift(system, a) - (shift(dc.tideSystem, b) - shift(dc.tideSystem, a));
            const levShift = shift(system, b) - shift(system, a) - (shift(sysB, b) - shift(sysA, a));
            clockCompared = dc.deltaC_m2s2 + clockShift;
            levellingCompared = levellingDeltaC === null ? null : levellingDeltaC + levShift;
            tide = {
              clockSystem: dc.tideSystem, fromDatumSystem: sysA, toDatumSystem: sysB, comparedIn: system,
              clockShift_m2s2: clockShift, levellingShift_m2s2: levShift,
              statement: clockShift === 0 && levShift === 0
                ? `clock result and levelling both ${system}: no conversion`
                : `compared in ${system}: clock ΔC ${dc.tideSystem} → ${system} ${fmtShift(clockShift)}, levelled ΔC ${sysA === sysB ? sysA : `${sysA}/${sysB}`} → ${system} ${fmtShift(levShift)} (Ekman 1989; Mäkinen & Ihde 2009)`,
            };
          }
        }
        // Across two datums that no levelling joins, the levelled ΔC carries the unknown datum offset: E_n would test
        // that offset, not the clocks, so no verdict of agreement is given.
        const joined = !!(a && b) && (!crosses || connected(a.code, b.code));
        const comparable = joined && tideKnown;
        const agreement = comparable && levellingCompared !== null && levellingU !== null && clockU + levellingU > 0
          ? normalisedError(clockCompared, clockU, levellingCompared, levellingU) : null;
        let verdict: Reconciliation['rows'][number]['verdict'] = 'no-levelling';
        if (a && b && !joined) {
          verdict = 'not-comparable';
          note = `${a.datumName} and ${b.datumName} are not connected by levelling: the levelled ΔC contains the unknown offset between them.`;
        } else if (a && b && !tideKnown) {
          verdict = 'not-comparable';
          note = `Tide system not stated (${dc.tideSystem === null ? 'clock result' : ''}${dc.tideSystem === null && (sysA === null || sysB === null) ? ' and ' : ''}${sysA === null || sysB === null ? 'height datum' : ''}): state it, nothing is compared until then.`;
        } else if (agreement) {
          verdict = agreement.agreed ? 'agreed' : 'not-agreed';
          if (crosses) note = `${a!.datumName} and ${b!.datumName} are joined by levelling, so the levelled ΔC spans both datums`;
        }
        rows.push({
          source: item.source, chainId: item.source === 'chain' ? c.id : null,
          linkId: c.linkId, linkLabel: links.get(c.linkId)?.name ?? c.linkId, campaignId: c.id, campaignLabel: item.source === 'chain' ? `chain: ${c.name}` : c.name,
          fromSite: siteA ? siteLabel(siteA) : c.siteAId, toSite: siteB ? siteLabel(siteB) : c.siteBId,
          fromDatum: a?.datumName ?? null, toDatum: b?.datumName ?? null,
          crossesDatums: crosses, comparable, verdict, clockDeltaC_m2s2: dc.deltaC_m2s2, clockExpandedU_m2s2: clockU,
          levellingDeltaC_m2s2: levellingDeltaC, levellingExpandedU_m2s2: levellingU,
          levellingSigma_m2s2: levellingSigma, levellingSigmaIgnoringCovariance_m2s2: sigmaIgnoringCov, levellingSigmaMethod: sigmaMethod,
          levellingSigmaScaled: scale !== 1,
          tide,
          difference_m2s2: levellingCompared === null ? null : clockCompared - levellingCompared,
          en: agreement?.en ?? null, agreed: agreement?.agreed ?? null, note,
        });
      }
      const message = rows.length === 0
        ? campaigns.length === 0
          ? 'No accepted campaign that you may see exists yet, so there is nothing to reconcile.'
          : 'Accepted campaigns exist, but none has a computed result yet: nothing to compare with the levelling.'
        : lv ? null : 'No adjustment run without clock observations has finished yet: start one to get the levelling side.';
      return {
        levellingRunId: levelling?.id ?? null, levellingRunAt: levelling?.finishedAt?.toISOString() ?? null, clockRunId: withClocks?.id ?? null,
        rows, datumOffsets: (withClocks?.result as RunResult | null)?.datumOffsets ?? [], message,
        sigmaPolicy: {
          scaled: scale !== 1, factor: scale,
          statement: scale !== 1
            ? `The levelling-only run failed the global test (vᵀPv too large): its σ are scaled by σ̂0 = ${scale.toFixed(2)}.`
            : 'The levelling-only run passed the global test (or has no redundancy): σ on the a-priori scale (σ0 = 1), not scaled by σ̂0.',
          covariance: 'σ(ΔC) of the levelling = √(q_AA + q_BB − 2q_AB) from the adjustment: the two sites share the levelling back to the fixed benchmarks, which the root-sum-square √(σ_A² + σ_B²) would count twice.',
        },
      };
    },

    async map(actor: Actor): Promise<NetworkMap> {
      authorize(actor, 'network:read');
      const m = dataSource.manager;
      const benchmarks = await m.getRepository(BenchmarkEntity).find({ relations: { datum: true }, order: { code: 'ASC' } });
      const sections = await loadSectionsWithBenchmarks(m);
      const run = await latestDone(m, null);
      const result = run?.result as RunResult | null;
      const obs = new Map(result?.observations.map((o) => [o.id, o]) ?? []);
      const sites = await loadSites(m);
      const links = await loadLinks(m);
      const recon = await this.reconciliation(actor);
      const byLink = new Map<string, NetworkMap['links'][number]['comparisons']>();
      for (const r of recon.rows) byLink.set(r.linkId, [...(byLink.get(r.linkId) ?? []), { campaignLabel: r.campaignLabel, en: r.en, verdict: r.verdict }]);
      return {
        benchmarks: benchmarks.map((b) => ({ id: b.id, code: b.code, name: b.name, latitudeDeg: b.latitudeDeg, longitudeDeg: b.longitudeDeg, fixed: b.fixed, destroyed: b.state === 'destroyed', datumName: b.datum?.name ?? '' })),
        sections: sections.map((s) => {
          const o = obs.get(`section:${s.id}`);
          return { id: s.id, fromCode: s.fromBenchmark!.code, toCode: s.toBenchmark!.code, lineName: s.lineName, adjusted: !!o, standardizedResidual: o?.standardizedResidual ?? null, suspected: o?.suspected ?? false };
        }),
        sites: sites.map((s) => ({ id: s.id, code: s.instituteCode, name: s.name, latitudeDeg: s.latitudeDeg, longitudeDeg: s.longitudeDeg, benchmarkCode: s.benchmarkCode })),
        links: links.map((l) => {
          const comparisons = byLink.get(l.id) ?? [];
          // The link's headline E_n is the largest in magnitude of its campaigns; each campaign is listed as well.
          const ens = comparisons.map((c) => c.en).filter((e): e is number => e !== null);
          const en = ens.length ? ens.reduce((x, y) => (Math.abs(y) > Math.abs(x) ? y : x)) : null;
          return { id: l.id, label: l.name, fromSiteId: l.siteAId, toSiteId: l.siteBId, en, comparisons };
        }),
        runId: run?.id ?? null,
      };
    },
  };
}

/** The stateless calculator: adjusts what the caller sends, stores nothing. */
export function calcAdjust(actor: Actor, body: CalcAdjustBody): CalcAdjustResult {
  authorize(actor, 'calc:use');
  const systematics = new Map<string, number>();
  body.clockSystematics.forEach((c, i) => {
    if (systematics.has(c.clock)) throw new Invalid(`clockSystematics[${i}]: clock ${c.clock} is listed twice`, [{ path: `body.clockSystematics.${i}.clock`, message: 'listed twice' }]);
    systematics.set(c.clock, c.sigma);
  });
  const param = (clock: string) => `clock ${clock}`;
  const observations: NetworkObservation[] = body.observations.map((o, i) => {
    const ob: NetworkObservation = { id: String(i), from: o.from, to: o.to, deltaC: o.deltaC, sigma: o.sigma };
    if (o.clocks) {
      for (const end of ['from', 'to'] as const) {
        if (!systematics.has(o.clocks[end])) {
          throw new Invalid(`observations[${i}].clocks.${end}: clock ${o.clocks[end]} has no entry in clockSystematics`, [{ path: `body.observations.${i}.clocks.${end}`, message: `clock ${o.clocks[end]} is not in clockSystematics` }]);
        }
      }
      ob.terms = [{ name: param(o.clocks.from), coefficient: -1 }, { name: param(o.clocks.to), coefficient: 1 }];
    }
    return ob;
  });
  let res;
  try {
    res = adjustNetwork({
      points: body.points, observations,
      options: { sharedParameters: body.clockSystematics.map((c) => ({ name: param(c.clock), sigma: c.sigma })), differences: body.differences },
    });
  } catch (e) {
    if (e instanceof AdjustmentInputError) {
      if (e.detail.reason === 'disconnected') {
        const parts = e.detail.parts ?? [];
        throw new NetworkNotConnected(`These parts of the network reach no fixed point: ${describeParts(parts)}.`, parts);
      }
      const path = (e.detail.path ?? e.detail.unknown ?? 'points').replace(/^options\.differences/, 'differences').replace(/^options\.sharedParameters/, 'clockSystematics').replace(/\[(\d+)\]/g, '.$1');
      throw new Invalid(e.message, [{ path: `body.${path}`, message: e.message }]);
    }
    throw e;
  }
  return {
    points: res.points.map((p) => ({ code: p.code, c: p.c, sigma: p.sigma })),
    observations: res.observations.map((o) => ({
      from: o.from, to: o.to, residual: o.residual, redundancy: o.redundancy, standardizedResidual: o.standardizedResidual,
      suspected: o.suspected, removedAtStep: o.removedAtStep,
    })),
    differences: res.differences.map((d) => ({ from: d.from, to: d.to, deltaC: d.deltaC, sigma: d.sigma })),
    clockSystematics: res.sharedParameters.map((s, j) => ({ clock: body.clockSystematics[j].clock, estimate: s.value, sigma: s.sigma, priorSigma: s.priorSigma, observations: s.observations })),
    snooping: {
      criticalValue: res.snooping.criticalValue,
      removals: res.snooping.removals.map((r) => ({ step: r.step, source: r.source, index: r.index, from: r.from, to: r.to, code: r.code, standardizedResidual: r.standardizedResidual })),
      stoppedEarly: res.snooping.stoppedEarly,
    },
    sigma0: res.sigma0, degreesOfFreedom: res.degreesOfFreedom,
    globalTest: res.globalTest ? { statistic: res.globalTest.statistic, critical: res.globalTest.critical, passed: res.globalTest.passed } : null,
  };
}
