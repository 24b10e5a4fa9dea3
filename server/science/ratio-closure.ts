// Clock-ratio closures. Frequency ratios multiply around a loop of clocks: for campaigns A→B, B→C, C→A measured
// at the same time, R_AB·R_BC·R_CA = 1 exactly, whatever the clocks' species. With R = R0·(1 + y) per campaign
// (y = R/R0 − 1, server/science/redshift.ts) the closure
//     ε = Σ s_i·ln(1 + y_i) + Σ s_i·ln R0_i  ≈  Σ s_i·y_i + ε_R0,     s_i = +1 when the loop runs A→B of campaign i, −1 otherwise,
// must vanish; ln(1 + y) = y to better than y²/2 ≈ 1e-32. ε_R0 = Σ s_i·ln R0_i is exact decimal arithmetic on the
// reference ratios and is zero when they are mutually consistent (the same Yb⁺/Sr ratio used in both directions).
// ε is a function of the measured ratios only, so the reference ratios' own uncertainties do not enter.
//
// Method (sources):
//  - ε is evaluated sample by sample on a common grid over the common time of the campaigns: every campaign's valid
//    samples are averaged into slots of τ0 (the coarsest spacing of the legs), a slot counts when every leg has a valid
//    sample in it, z_k = Σ s_i·(ȳ_i,k − y_tide,i(t_k)) and ε = mean(z). Noise common to two legs (a clock appearing in
//    both) cancels in z as it does in ε. The statistical uncertainty of the mean is that of the z series with the noise
//    identified at each τ (NIST SP 1065 §5.2; server/science/stability.ts).
//  - Budget after JCGM 100:2008 (GUM): sensitivities §5.1.3, u_c² = Σ (c_i·u(x_i))² for uncorrelated inputs (eq. 10),
//    ν_eff by Welch–Satterthwaite (G.4.1, eq. G.2b), U = k·u_c with k = t_p(ν_eff) (§6.2.1, G.6.4). Shared inputs are
//    single inputs: each clock's pinned budget version is one input x whose sensitivity is the sum over the legs using
//    it (−s_i as clock A, +s_i as clock B), so a clock that enters two legs with opposite signs cancels (c = 0) and two
//    different budget versions of one clock are two inputs that add. Fibre links are one input per leg (conservative:
//    a link's residual is not taken as stable from one comparison to the next). The tide correction of a loop sums to
//    zero when every clock sits at the same site in each leg; otherwise its model uncertainty enters once.
//  - Agreement with the expected closure 0: E_n = ε/U(ε), |E_n| ≤ 1 satisfactory (ISO 13528:2015 §9.7 with the reference
//    value 0 exactly and U_ref = 0; clause number from memory).
//  - Loops: the comparisons form a multigraph (clocks = vertices, campaigns = edges). Loops are sought in each elementary
//    time interval (between consecutive period boundaries), among the campaigns running through the whole interval; each
//    interval contributes the fundamental cycles of a breadth-first spanning forest, one per edge outside the forest,
//    m − n + c of them (the dimension of the cycle space; Diestel, Graph Theory, 5th ed. 2017, §1.9, from memory). The
//    union over intervals, deduplicated by campaign set, is the list of loops. A basis suffices: every other loop of the
//    interval is a sum of basis loops, and so is its closure. Two campaigns between the same clocks at the same time form
//    a loop of two.

import Decimal from 'decimal.js';
import { C2_M2_PER_S2 } from './constants';

/** 50 significant digits: ln R0 of a ratio near 1.2 must resolve 1e-20 and below. */
const D50 = Decimal.clone({ precision: 50 });
import { ScienceInputError } from './errors';
import { normalisedError } from './agreement';
import { meanWithStatisticalUncertainty, stabilityAnalysis } from './stability';
import { tidePotentialSeries, type TideSite } from './tides';
import { COVERAGE_PROBABILITY_K2, combineBudget, type BudgetComponent } from './uncertainty';

// ------------------------------------------------------------------ loop search

export interface ComparisonEdge {
  id: string;
  clockA: string;
  clockB: string;
  /** Period (any consistent time unit, e.g. ms or MJD). */
  start: number;
  end: number;
}

export interface LoopLeg {
  campaignId: string;
  /** +1 when the loop runs from the campaign's clock A to its clock B, −1 the other way. */
  sign: 1 | -1;
}

export interface FoundLoop {
  /** Canonical key: the sorted campaign ids joined by ','. */
  key: string;
  legs: LoopLeg[];
  /** The clocks in loop order, starting at the first leg's start. */
  clocks: string[];
  commonStart: number;
  commonEnd: number;
}

type Adj = { edge: ComparisonEdge; to: string }[];

/** Orients and rotates a cycle (edges in traversal order from `startClock`) so that its first leg is the campaign with the smallest id, run forwards. */
function canonicalLoop(cycle: { edge: ComparisonEdge; from: string }[]): FoundLoop {
  let best = 0;
  for (let i = 1; i < cycle.length; i++) if (cycle[i].edge.id < cycle[best].edge.id) best = i;
  let ordered = [...cycle.slice(best), ...cycle.slice(0, best)];
  // Run the smallest campaign forwards (A→B); reverse the traversal if it is run backwards.
  if (ordered[0].from !== ordered[0].edge.clockA) {
    const first = ordered[0];
    const rest = ordered.slice(1).reverse();
    const reversed = [first, ...rest].map((step) => ({ edge: step.edge, from: '' }));
    // Recompute the traversal start of each step in the reversed direction.
    let at = first.edge.clockA;
    for (const step of reversed) {
      step.from = at;
      at = step.edge.clockA === at ? step.edge.clockB : step.edge.clockA;
    }
    ordered = reversed;
  }
  const legs: LoopLeg[] = ordered.map((s) => ({ campaignId: s.edge.id, sign: s.from === s.edge.clockA ? 1 : -1 }));
  return {
    key: ordered.map((s) => s.edge.id).sort().join(','),
    legs,
    clocks: ordered.map((s) => s.from),
    commonStart: Math.max(...ordered.map((s) => s.edge.start)),
    commonEnd: Math.min(...ordered.map((s) => s.edge.end)),
  };
}

/** Fundamental cycles of a BFS spanning forest of the comparison multigraph (deterministic: sorted clocks and campaigns). */
export function fundamentalCycles(edges: readonly ComparisonEdge[]): FoundLoop[] {
  const sorted = [...edges].filter((e) => e.clockA !== e.clockB).sort((a, b) => (a.id < b.id ? -1 : a.id > b.id ? 1 : 0));
  const adj = new Map<string, Adj>();
  for (const e of sorted) {
    if (!adj.has(e.clockA)) adj.set(e.clockA, []);
    if (!adj.has(e.clockB)) adj.set(e.clockB, []);
    adj.get(e.clockA)!.push({ edge: e, to: e.clockB });
    adj.get(e.clockB)!.push({ edge: e, to: e.clockA });
  }
  const parent = new Map<string, { clock: string; edge: ComparisonEdge } | null>();
  const depth = new Map<string, number>();
  const treeEdges = new Set<string>();
  for (const root of [...adj.keys()].sort()) {
    if (parent.has(root)) continue;
    parent.set(root, null);
    depth.set(root, 0);
    const queue = [root];
    for (let qi = 0; qi < queue.length; qi++) {
      const u = queue[qi];
      for (const { edge, to } of adj.get(u)!) {
        if (parent.has(to)) continue;
        parent.set(to, { clock: u, edge });
        depth.set(to, depth.get(u)! + 1);
        treeEdges.add(edge.id);
        queue.push(to);
      }
    }
  }
  const loops: FoundLoop[] = [];
  for (const e of sorted) {
    if (treeEdges.has(e.id)) continue;
    // Tree paths from both ends up to their lowest common ancestor.
    const up: { edge: ComparisonEdge; from: string }[] = []; // from clockB towards the ancestor
    const down: { edge: ComparisonEdge; from: string }[] = []; // from the ancestor towards clockA (collected upwards, reversed below)
    let u = e.clockB;
    let v = e.clockA;
    while (u !== v) {
      if (depth.get(u)! >= depth.get(v)!) {
        const p = parent.get(u)!;
        up.push({ edge: p.edge, from: u });
        u = p.clock;
      } else {
        const p = parent.get(v)!;
        down.push({ edge: p.edge, from: p.clock });
        v = p.clock;
      }
    }
    // Cycle: A →(e) B → … → ancestor → … → A.
    const cycle = [{ edge: e, from: e.clockA }, ...up, ...down.reverse()];
    loops.push(canonicalLoop(cycle));
  }
  return loops;
}

/**
 * Every loop of campaigns that ran at the same time: the union over elementary time intervals of the fundamental
 * cycles of the campaigns active through the interval, deduplicated by campaign set. Periods that only touch do not overlap.
 */
export function findClosureLoops(edges: readonly ComparisonEdge[]): FoundLoop[] {
  const bounds = [...new Set(edges.flatMap((e) => [e.start, e.end]))].sort((a, b) => a - b);
  const byStart = [...edges].filter((e) => e.end > e.start).sort((a, b) => a.start - b.start);
  const found = new Map<string, FoundLoop>();
  let lastActive = '';
  for (let i = 0; i + 1 < bounds.length; i++) {
    const lo = bounds[i];
    const hi = bounds[i + 1];
    const active = byStart.filter((e) => e.start <= lo && e.end >= hi);
    if (active.length < 2) continue;
    const signature = active.map((e) => e.id).join(',');
    if (signature === lastActive) continue;
    lastActive = signature;
    for (const loop of fundamentalCycles(active)) if (!found.has(loop.key)) found.set(loop.key, loop);
  }
  return [...found.values()].sort((a, b) => (a.key < b.key ? -1 : 1));
}

// ------------------------------------------------------------------ closure of one loop

export interface ClosureClock {
  id: string;
  name: string;
  site: TideSite & { id: string };
  budget: { id: string; version: number; totalUncertainty: number };
}

export interface ClosureLegInput {
  campaignId: string;
  campaignName: string;
  sign: 1 | -1;
  clockA: ClosureClock;
  clockB: ClosureClock;
  link: { id: string; name: string; fractionalUncertainty: number };
  referenceRatio: { value: string; source: string };
  /** Ascending MJD epochs with y = R/R0 − 1 (not tide-corrected) and validity flags. */
  epochMjd: Float64Array;
  y: Float64Array;
  valid: Uint8Array;
}

export interface ClosureBudgetLine {
  component: string;
  type: 'A' | 'B';
  standardUncertainty: number;
  sensitivity: number;
  contribution: number;
  varianceShare: number;
  note: string;
}

export interface ClosureResult {
  legs: { campaignId: string; campaignName: string; sign: 1 | -1; from: string; to: string; meanY: number; referenceRatio: string }[];
  commonStartMjd: number;
  commonEndMjd: number;
  tau0Seconds: number;
  commonSamples: number;
  /** Σ s_i·mean(y_i − y_tide,i) over the common slots. */
  sumY: number;
  /** Σ s_i·ln R0_i (exact decimal arithmetic, rounded to a double). */
  referenceRatioTerm: number;
  /** ε = sumY + referenceRatioTerm. */
  closure: number;
  statisticalUncertainty: number | null;
  statisticalMethod: string;
  budget: ClosureBudgetLine[];
  combinedStandardUncertainty: number;
  coverageFactor: number;
  coverageProbability: number;
  effectiveDegreesOfFreedom: number | null;
  expandedUncertainty: number;
  en: number;
  agreed: boolean;
  /** Decimated closure series z (slot means), at most 300 points. */
  series: { mjd: number; z: number }[];
  cautions: string[];
}

/** The tide model's own uncertainty rule of the campaign results (server/results/compute-result.ts): 1 % of the peak-to-peak, at least 1e-19. */
const TIDE_RELATIVE = 0.01;
const TIDE_FLOOR = 1e-19;
const NET_TIDE_ZERO = 1e-24;
const SERIES_POINTS = 300;

function medianSpacingSeconds(epochs: Float64Array): number {
  const n = epochs.length;
  if (n < 2) return NaN;
  const d = Float64Array.from({ length: n - 1 }, (_, i) => (epochs[i + 1] - epochs[i]) * 86_400).sort();
  return d[Math.floor((n - 1) / 2)];
}

/** The closure of one loop over the common time of its campaigns (see the module comment for the method). */
export function computeClosure(legs: readonly ClosureLegInput[], opts: { commonStartMjd: number; commonEndMjd: number }): ClosureResult {
  if (legs.length < 2) throw new ScienceInputError('legs', 'a loop needs at least two campaigns');
  // The loop must close: leg i ends where leg i+1 starts.
  const endOf = (l: ClosureLegInput) => (l.sign === 1 ? l.clockB.id : l.clockA.id);
  const startOf = (l: ClosureLegInput) => (l.sign === 1 ? l.clockA.id : l.clockB.id);
  legs.forEach((l, i) => {
    if (endOf(l) !== startOf(legs[(i + 1) % legs.length])) throw new ScienceInputError(`legs[${i}]`, 'the campaigns do not form a closed loop in this order');
  });
  const tau0 = Math.max(...legs.map((l) => medianSpacingSeconds(l.epochMjd)).filter(Number.isFinite));
  if (!(tau0 > 0)) throw new ScienceInputError('legs', 'every campaign needs at least two samples');
  const start = opts.commonStartMjd;
  const slots = Math.floor(((opts.commonEndMjd - start) * 86_400) / tau0);
  if (!(slots >= 1)) throw new ScienceInputError('commonTime', 'the campaigns have no common time');

  // Slot means of each leg's valid samples (slot k covers [start + k·τ0 − τ0/2, start + k·τ0 + τ0/2)).
  const sums = legs.map(() => new Float64Array(slots));
  const counts = legs.map(() => new Uint32Array(slots));
  legs.forEach((l, li) => {
    for (let i = 0; i < l.epochMjd.length; i++) {
      if (l.valid[i] !== 1 || !Number.isFinite(l.y[i])) continue;
      const k = Math.round(((l.epochMjd[i] - start) * 86_400) / tau0);
      if (k < 0 || k >= slots) continue;
      sums[li][k] += l.y[i];
      counts[li][k]++;
    }
  });
  const slotEpochs = Float64Array.from({ length: slots }, (_, k) => start + (k * tau0) / 86_400);
  // Tidal part of each leg's y: (W_A − W_B)/c² with W the periodic tide potential at each site (as the campaign results).
  const tideAt = new Map<string, Float64Array>();
  const tideOf = (s: ClosureClock['site']) => {
    let t = tideAt.get(s.id);
    if (!t) {
      t = tidePotentialSeries(s, slotEpochs, { removePermanent: true });
      tideAt.set(s.id, t);
    }
    return t;
  };
  const legTide = legs.map((l) => {
    const wA = tideOf(l.clockA.site);
    const wB = tideOf(l.clockB.site);
    return Float64Array.from({ length: slots }, (_, k) => (wA[k] - wB[k]) / C2_M2_PER_S2);
  });
  const z = new Float64Array(slots).fill(NaN);
  const valid = new Uint8Array(slots);
  const legSum = legs.map(() => 0);
  let common = 0;
  let netTideMin = Infinity;
  let netTideMax = -Infinity;
  for (let k = 0; k < slots; k++) {
    if (!legs.every((_, li) => counts[li][k] > 0)) continue;
    let s = 0;
    let tide = 0;
    legs.forEach((l, li) => {
      const yk = sums[li][k] / counts[li][k] - legTide[li][k];
      legSum[li] += yk;
      s += l.sign * yk;
      tide += l.sign * legTide[li][k];
    });
    z[k] = s;
    valid[k] = 1;
    common++;
    if (tide < netTideMin) netTideMin = tide;
    if (tide > netTideMax) netTideMax = tide;
  }
  if (common < 3) throw new ScienceInputError('commonTime', `only ${common} common sample slot(s) of ${tau0} s: at least three are needed`);

  const points = stabilityAnalysis({ y: z, valid, tau0Seconds: tau0 });
  const mean = meanWithStatisticalUncertainty({ y: z, valid, tau0Seconds: tau0, points });
  const referenceRatioTerm = legs.reduce((acc, l) => acc.plus(new D50(l.referenceRatio.value).ln().times(l.sign)), new D50(0)).toNumber();
  const closure = mean.mean + referenceRatioTerm;

  // Budget: shared clock budget versions as single inputs with summed sensitivities; one link input per leg.
  const lines: (BudgetComponent & { note: string })[] = [
    { name: 'Statistical (closure series)', type: 'A', standardUncertainty: mean.statisticalUncertainty ?? 0, sensitivity: 1, unit: '1', degreesOfFreedom: mean.degreesOfFreedom ?? undefined, note: mean.method },
  ];
  const budgets = new Map<string, { clock: string; version: number; u: number; c: number; legs: string[] }>();
  legs.forEach((l, li) => {
    for (const [clock, c] of [[l.clockA, -l.sign], [l.clockB, l.sign]] as const) {
      const entry = budgets.get(clock.budget.id) ?? { clock: clock.name, version: clock.budget.version, u: clock.budget.totalUncertainty, c: 0, legs: [] };
      entry.c += c;
      entry.legs.push(`leg ${li + 1} (${c > 0 ? '+' : '−'})`);
      budgets.set(clock.budget.id, entry);
    }
  });
  for (const b of budgets.values()) {
    lines.push({
      name: `Clock ${b.clock} systematic (budget v${b.version})`, type: 'B', standardUncertainty: b.u, sensitivity: b.c, unit: '1',
      note: b.c === 0 ? `shared input in ${b.legs.join(' and ')}: cancels around the loop` : `enters ${b.legs.join(' and ')}`,
    });
  }
  legs.forEach((l, li) => {
    lines.push({ name: `Fibre link ${l.link.name} (leg ${li + 1})`, type: 'B', standardUncertainty: l.link.fractionalUncertainty, sensitivity: l.sign, unit: '1', note: 'registered link uncertainty, one input per leg' });
  });
  const netPeakToPeak = netTideMax - netTideMin;
  const tideCancels = Math.max(Math.abs(netTideMin), Math.abs(netTideMax)) < NET_TIDE_ZERO;
  lines.push({
    name: 'Tide model', type: 'B', standardUncertainty: tideCancels ? TIDE_FLOOR : Math.max(TIDE_RELATIVE * netPeakToPeak, TIDE_FLOOR), sensitivity: tideCancels ? 0 : 1, unit: '1',
    note: tideCancels
      ? 'each clock sits at one site in every leg, so the tide corrections sum to zero around the loop and their model error cancels'
      : `the tide corrections do not cancel (a clock at different sites in two legs); max(${TIDE_RELATIVE * 100} % of the net correction’s peak-to-peak, 1e-19) — our assumption`,
  });
  const combined = combineBudget(lines, { coverageProbability: COVERAGE_PROBABILITY_K2 });
  const U = combined.expandedUncertainty;
  if (!(U > 0)) throw new ScienceInputError('budget', 'the closure has no uncertainty at all; E_n is undefined');
  const agreement = normalisedError(closure, U, 0, 0);

  const series: ClosureResult['series'] = [];
  const bucket = Math.max(1, Math.ceil(slots / SERIES_POINTS));
  for (let b0 = 0; b0 < slots; b0 += bucket) {
    let s = 0;
    let n = 0;
    let t = 0;
    for (let k = b0; k < Math.min(slots, b0 + bucket); k++) {
      if (valid[k] !== 1) continue;
      s += z[k];
      t += slotEpochs[k];
      n++;
    }
    if (n > 0) series.push({ mjd: t / n, z: s / n });
  }

  const cautions: string[] = [];
  if (mean.statisticalUncertainty === null) cautions.push('Too few common samples for an Allan deviation of the closure series: no statistical uncertainty is included.');
  if (Math.abs(referenceRatioTerm) > 0) cautions.push(`The reference ratios of the legs are not mutually consistent: Σ s·ln R0 = ${referenceRatioTerm.toExponential(3)} is added to the sum of the fractional offsets.`);
  if (!tideCancels) cautions.push('A clock sits at different sites in two legs of the loop: the tide corrections do not cancel.');
  if (common < 0.5 * slots) cautions.push(`Only ${((100 * common) / slots).toFixed(1)} % of the common time has valid samples in every campaign.`);

  return {
    legs: legs.map((l, li) => ({
      campaignId: l.campaignId, campaignName: l.campaignName, sign: l.sign, from: l.sign === 1 ? l.clockA.name : l.clockB.name, to: l.sign === 1 ? l.clockB.name : l.clockA.name,
      meanY: legSum[li] / common, referenceRatio: l.referenceRatio.value,
    })),
    commonStartMjd: start,
    commonEndMjd: opts.commonEndMjd,
    tau0Seconds: tau0,
    commonSamples: common,
    sumY: mean.mean,
    referenceRatioTerm,
    closure,
    statisticalUncertainty: mean.statisticalUncertainty,
    statisticalMethod: mean.method,
    budget: lines.map((l, i) => ({
      component: l.name, type: l.type, standardUncertainty: l.standardUncertainty, sensitivity: l.sensitivity,
      contribution: combined.lines[i].contribution, varianceShare: combined.lines[i].varianceShare, note: l.note,
    })),
    combinedStandardUncertainty: combined.combinedStandardUncertainty,
    coverageFactor: combined.coverageFactor,
    coverageProbability: COVERAGE_PROBABILITY_K2,
    effectiveDegreesOfFreedom: Number.isFinite(combined.effectiveDegreesOfFreedom) ? combined.effectiveDegreesOfFreedom : null,
    expandedUncertainty: U,
    en: agreement.en,
    agreed: agreement.agreed,
    series,
    cautions,
  };
}

export const CLOSURE_METHOD = {
  statement:
    'ε = Σ s_i·y_i + Σ s_i·ln R0_i over the common time on a common τ0 grid (slot means of each campaign’s valid, tide-corrected samples; a slot counts when every campaign has one); shared clock budget versions are single GUM inputs with summed sensitivities (a clock in two legs with opposite signs cancels), one fibre-link input per leg, the tide model where the corrections do not cancel; u_c by JCGM 100:2008 eq. 10, k = t_p(ν_eff) for p = 95.45 %, Eₙ = ε/U against the expected closure 0.',
  sources: [
    'JCGM 100:2008 (GUM), §5.1.3, eq. (10), §6.2.1, G.4.1, G.6.4',
    'ISO 13528:2015 §9.7 (Eₙ)',
    'NIST SP 1065 (Riley 2008), §5.2',
    'Diestel, Graph Theory, 5th ed. 2017, §1.9 (cycle space, fundamental cycles)',
  ],
  assumptions: [
    'Each lab’s uploaded ratios carry its clock’s systematic corrections; a clock’s residual systematic error is the same in every campaign that pins the same budget version.',
    'Fibre-link uncertainties are independent from leg to leg.',
    'ln(1 + y) is replaced by y (error below y²/2, about 1e-32 here).',
    'The expected closure is exactly zero; the reference ratios are divisors only and their uncertainties do not enter ε.',
  ],
  loopSearch:
    'Fundamental cycles of a breadth-first spanning forest of the campaigns running through each elementary time interval (one loop per campaign outside the forest), deduplicated by campaign set; every other loop is a sum of these.',
} as const;
