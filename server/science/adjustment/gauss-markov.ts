// Least-squares adjustment of a levelling network in geopotential numbers (Gauss–Markov model, observation equations).
// Model and statistics: Ghilani, "Adjustment Computations", 6th ed., Wiley 2017, ch. 12 (level nets) and ch. 21 (blunder detection);
// Baarda, "A testing procedure for use in geodetic networks", Netherlands Geodetic Commission, Publ. on Geodesy 2(5), 1968 (w-test).
//
// Shared systematic effects (a clock's budget version, a fibre link, a reference ratio used by several campaigns) are
// extra parameters s with a zero prior and their standard deviation (pseudo-observations s = 0 ± σ_s). With each
// observation carrying only its own part of the variance this is algebraically the same estimator as generalised
// least squares with the full covariance Σ = Σ_own + B·Σ_s·Bᵀ (Koch, "Parameter Estimation and Hypothesis Testing in
// Linear Models", 2nd ed., Springer 1999, §3.4 "estimation with prior information on the parameters" — from memory;
// the equality is checked against dense GLS in the tests): same x̂, same Q_xx, same vᵀΣ⁻¹v and the same degrees of
// freedom, because every shared parameter adds one unknown and one pseudo-observation.
//
// Data snooping (Baarda 1968): adjust, remove the observation with the largest |w| above the critical value, adjust
// again, repeat until no |w| exceeds it (or the redundancy is used up); the removals are reported in order.

import { chiSquareQuantile, normalQuantile } from '../distributions';
import {
  factorize,
  inverseEntry,
  selectedInverse,
  SingularMatrixError,
  solve,
  symmetricFromTriplets,
  type LdlFactor,
  type SelectedInverse,
  type SymmetricCsc,
} from './sparse-ldl';
import { approximateMinimumDegree, type Ordering } from './ordering';

export type ObservationKind = 'levelling' | 'tie' | 'clock';

export interface NetworkPoint {
  code: string;
  /** Known geopotential number C [m²/s²]. */
  fixedC?: number;
  /** Standard deviation of fixedC [m²/s²]; absent or 0 holds the point exactly. */
  sigmaFixed?: number;
  group?: string;
}

export interface NetworkObservation {
  id?: string;
  from: string;
  to: string;
  /** Observed C_to − C_from [m²/s²]. */
  deltaC: number;
  /** A-priori standard deviation of deltaC [m²/s²]. */
  sigma: number;
  kind?: ObservationKind;
  /** Name of a datum-offset parameter added with coefficient +1 to this observation's equation. */
  datumOffset?: string;
  /**
   * Further parameters in this observation's equation, each with its coefficient: datum offsets (declared in
   * options.datumOffsets) or shared parameters (declared in options.sharedParameters).
   */
  terms?: ParameterTerm[];
}

export interface ParameterTerm {
  name: string;
  coefficient: number;
}

/** A random effect shared by several observations: zero prior expectation, prior standard deviation sigma. */
export interface SharedParameter {
  name: string;
  /** Prior standard deviation [m²/s²], > 0. */
  sigma: number;
}

export interface DifferenceRequest {
  from: string;
  to: string;
}

export type AdjustmentStage =
  | 'validation'
  | 'assembly'
  | 'ordering'
  | 'factorisation'
  | 'solution'
  | 'selected inversion'
  | 'statistical tests'
  | 'outlier screening'
  | 'adjustment after removals';

export interface AdjustmentOptions {
  /** Significance level of the two-sided global χ² test. Default 0.05. */
  alpha?: number;
  /** Significance level of each w-test in data snooping. Default 0.001 (k = 3.29). */
  alphaSnooping?: number;
  /** Names of datum-offset parameters that observations may reference. */
  datumOffsets?: string[];
  /**
   * 'fixed' (default): every point with fixedC is a datum point (hard if sigmaFixed is absent or 0,
   * weighted pseudo-observation otherwise). 'minimum': only the first point in input order that has
   * fixedC is held, exactly; all other points are free and their fixedC is only reported as knownC.
   */
  constraint?: 'fixed' | 'minimum';
  /** Shared random-effect parameters that observations may reference in their terms. */
  sharedParameters?: SharedParameter[];
  /** Adjusted differences C_to − C_from wanted with their standard deviation from the full covariance. */
  differences?: DifferenceRequest[];
  /** 'iterative' (default): Baarda's iteration, removing one observation at a time; 'none': test only. */
  snooping?: 'iterative' | 'none';
  /** Upper bound on removals by the iteration. Default 50. */
  maxRemovals?: number;
  /**
   * Called often (every few hundred columns of the factorisation and inversion, every few thousand observations of the
   * tests, every screening step) with the share done (0..1, never decreasing) and the stage; it must not throw.
   */
  onProgress?: (fraction: number, stage: AdjustmentStage) => void;
}

export interface AdjustmentInput {
  points: NetworkPoint[];
  observations: NetworkObservation[];
  options?: AdjustmentOptions;
}

export interface AdjustedPoint {
  code: string;
  /** Adjusted geopotential number [m²/s²]. */
  c: number;
  /** Standard deviation of c with the a-priori σ0 = 1 [m²/s²]; 0 for a point held exactly. */
  sigma: number;
  /** sigma × σ̂0 (a posteriori); null when the network has no redundancy. */
  sigmaScaled: number | null;
  datum: 'held' | 'weighted' | 'free';
  /** The input fixedC, also when the point was adjusted freely ('minimum' constraint). */
  knownC?: number;
}

export interface ResidualAnalysis {
  /** v = adjusted − observed [m²/s²]. */
  residual: number;
  /** A-priori standard deviation of v, σ·√r [m²/s²]. */
  sigmaResidual: number;
  /** r = 1 − p·aᵀQ_xx·a. */
  redundancy: number;
  /** w = v/σ_v with σ0 = 1; null when r ≈ 0 (observation not controlled). For a removed observation: w at its removal. */
  standardizedResidual: number | null;
  /** True only for an observation the data-snooping iteration removed. */
  suspected: boolean;
  /** 1-based step at which the iteration removed it; null when it stayed in the final adjustment. */
  removedAtStep: number | null;
}

export interface AdjustedObservation extends ResidualAnalysis {
  index: number;
  id?: string;
  from: string;
  to: string;
  kind: ObservationKind;
  deltaC: number;
  /** Standard deviation of the adjusted ΔC, σ·√(1 − r) [m²/s²]. */
  sigmaAdjusted: number;
  /** Σ coefficient × estimate of the shared parameters in this observation [m²/s²] (0 without any). */
  sharedEffect: number;
  /**
   * Generalised-least-squares residual (A·x̂ − l with the shared effects part of the error, not of the model):
   * residual − sharedEffect. Equals the residual without shared parameters.
   */
  residualTotal: number;
}

export interface FixedPointObservation extends ResidualAnalysis {
  code: string;
  fixedC: number;
  sigmaFixed: number;
}

export interface AdjustedDatumOffset {
  name: string;
  value: number;
  sigma: number;
  sigmaScaled: number | null;
}

export interface AdjustedSharedParameter {
  name: string;
  /** Estimate [m²/s²]; its prior expectation is 0. */
  value: number;
  /** A-posteriori standard deviation with σ0 = 1 [m²/s²]. */
  sigma: number;
  /** Prior standard deviation [m²/s²]. */
  priorSigma: number;
  /** Number of observations that share it. */
  observations: number;
}

export interface AdjustedDifference {
  from: string;
  to: string;
  /** Adjusted C_to − C_from [m²/s²]. */
  deltaC: number;
  /** √(q_ff + q_tt − 2q_ft) with σ0 = 1 [m²/s²]. */
  sigma: number;
  /** The same with the covariance neglected, √(σ_f² + σ_t²) — for comparison only. */
  sigmaIgnoringCovariance: number;
}

export interface SnoopingRemoval {
  step: number;
  source: 'observation' | 'fixedPoint';
  index: number;
  id?: string;
  from?: string;
  to?: string;
  code?: string;
  /** w of this observation in the adjustment from which it was removed. */
  standardizedResidual: number;
}

export interface GlobalTest {
  /** vᵀPv, distributed as χ²(dof) when σ0 = 1 holds. */
  statistic: number;
  degreesOfFreedom: number;
  alpha: number;
  /** χ² quantile at α/2. */
  lower: number;
  /** χ² quantile at 1 − α/2. */
  upper: number;
  /** Same as upper: the value a too-large vᵀPv is compared with. */
  critical: number;
  passed: boolean;
}

export interface SuspectedObservation {
  source: 'observation' | 'fixedPoint';
  /** Index into observations or fixedPointObservations. */
  index: number;
  id?: string;
  from?: string;
  to?: string;
  code?: string;
  standardizedResidual: number;
}

export interface AdjustmentResult {
  constraint: 'fixed' | 'minimum';
  /** The point held by the 'minimum' constraint. */
  heldPoint?: string;
  points: AdjustedPoint[];
  observations: AdjustedObservation[];
  fixedPointObservations: FixedPointObservation[];
  datumOffsets: AdjustedDatumOffset[];
  unknowns: number;
  degreesOfFreedom: number;
  vtpv: number;
  /** σ̂0 = √(vᵀPv / dof); null when dof = 0. */
  sigma0: number | null;
  /** null when dof = 0 (no redundancy, nothing to test). */
  globalTest: GlobalTest | null;
  sharedParameters: AdjustedSharedParameter[];
  differences: AdjustedDifference[];
  snooping: {
    alpha0: number;
    criticalValue: number;
    /** Removed observations (the iteration's suspects), in order of removal. */
    suspects: SuspectedObservation[];
    removals: SnoopingRemoval[];
    /** True when the iteration stopped at maxRemovals or at zero redundancy with an |w| still above the critical value. */
    stoppedEarly: boolean;
    /** Largest |w| left in the final adjustment, null when nothing is controlled. */
    maxRemainingW: number | null;
    /** The first adjustment, with every observation in: its σ̂0 and global test. */
    initial: { sigma0: number | null; degreesOfFreedom: number; globalTest: GlobalTest | null };
  };
  /** Non-zeros of the factor L (fill-in indicator). */
  factorNonZeros: number;
}

export interface AdjustmentInputErrorDetail {
  reason: 'invalid' | 'disconnected' | 'singular';
  /** Field path such as observations[3].sigma. */
  path?: string;
  /** For 'disconnected': the parts without datum, each with its first codes and size. */
  parts?: { codes: string[]; count: number }[];
  /** For 'singular': the unknown (point code or datum offset name). */
  unknown?: string;
}

export class AdjustmentInputError extends Error {
  readonly detail: AdjustmentInputErrorDetail;
  constructor(message: string, detail: AdjustmentInputErrorDetail) {
    super(message);
    this.name = 'AdjustmentInputError';
    this.detail = detail;
  }
}

const NAMED_CODES = 5;
/**
 * Screened removals are applied by rank-one downdates only when every removed row had r ≥ this; c = p/r then stays
 * within 1000·p, so the rounding of the updates stays far below the tolerances of the tests (common practice).
 */
const DOWNDATE_MIN_REDUNDANCY = 1e-3;
/** Below this a redundancy number is treated as zero: rounding noise of 1 − p·q (common practice). */
const REDUNDANCY_FLOOR = 1e-10;

export function adjustNetwork(input: AdjustmentInput): AdjustmentResult {
  const options = input.options ?? {};
  const mode = options.snooping ?? 'iterative';
  const maxRemovals = options.maxRemovals ?? 50;
  if (!(Number.isInteger(maxRemovals) && maxRemovals >= 0)) throw invalid('options.maxRemovals', 'maxRemovals must be a whole number ≥ 0');
  const report = options.onProgress ?? (() => undefined);
  // Fractions reported never go back: a pass maps its own 0..1 into [lo, hi] of the whole.
  let reported = 0;
  const progress = (fraction: number, stage: AdjustmentStage): void => {
    if (fraction > reported) reported = fraction;
    report(reported, stage);
  };
  const span = (lo: number, hi: number, stage?: AdjustmentStage) => (f: number, s: AdjustmentStage) => progress(lo + (hi - lo) * f, stage ?? s);
  const nObsAll = input.observations.length;
  const removedObs = new Map<number, SnoopingRemoval>();
  const removedFixed = new Map<number, SnoopingRemoval>();
  const removals: SnoopingRemoval[] = [];
  let stoppedEarly = false;

  // Each pass adjusts the observations not yet removed; original indices are kept in `obsMap`. The unknowns stay the
  // same from pass to pass (a removed weighted fixed value leaves its point an unknown), so the fill-reducing ordering
  // of the first pass is reused.
  let ordering: Ordering | undefined;
  const run = (
    onProgress: (fraction: number, stage: AdjustmentStage) => void, screen = false, downdated?: Downdate, previous?: { core: CoreResult; obsMap: number[] },
  ) => {
    const obsMap: number[] = [];
    for (let k = 0; k < nObsAll; k++) if (!removedObs.has(k)) obsMap.push(k);
    // A pass over a subset of the previous pass's observations takes their checked and resolved form from it.
    let reuse: Reuse | undefined;
    if (previous?.core.prepared) {
      const from = new Int32Array(obsMap.length);
      const prev = previous.obsMap;
      let q = 0;
      for (let k = 0; k < obsMap.length && q < prev.length; k++) {
        while (q < prev.length && prev[q] !== obsMap[k]) q++;
        from[k] = q;
      }
      if (q < prev.length) reuse = { prepared: previous.core.prepared, from };
    }
    const points = input.points.map((p, i) => {
      if (!removedFixed.has(i)) return p;
      const { fixedC: _f, sigmaFixed: _s, ...rest } = p;
      return rest;
    });
    const core = adjustCore(
      { points, observations: obsMap.map((k) => input.observations[k]), options },
      onProgress,
      obsMap,
      ordering,
      screen,
      Math.max(0, maxRemovals - removals.length),
      downdated,
      reuse,
    );
    ordering = core.ordering;
    return { core, obsMap };
  };

  let pass = run(span(0, mode === 'iterative' ? 0.92 : 1), mode === 'iterative');
  const initial = { sigma0: pass.core.sigma0, degreesOfFreedom: pass.core.degreesOfFreedom, globalTest: pass.core.globalTest };
  if (mode === 'iterative' && pass.core.screened.length > 0) {
    // Apply the screened sequence (each w is the one the full iteration would compute at that step), then adjust once
    // without those rows; the loop below continues with full adjustments should anything still exceed the critical value.
    const { core, obsMap } = pass;
    const staged: SnoopingRemoval[] = core.screened.map((c, j) => {
      const removal: SnoopingRemoval = { step: j + 1, source: c.source, index: c.source === 'observation' ? obsMap[c.index] : c.index, standardizedResidual: c.w };
      if (c.source === 'observation') {
        const ob = input.observations[removal.index];
        removal.from = ob.from;
        removal.to = ob.to;
        if (ob.id !== undefined) removal.id = ob.id;
      } else removal.code = input.points[c.index].code;
      return removal;
    });
    for (const r of staged) (r.source === 'observation' ? removedObs : removedFixed).set(r.index, r);
    // The adjustment without the screened rows reuses the factor and selected inverse with the screening's rank-one
    // downdates (x' refined against N' = AᵀPA of the kept rows, Q' = Q + Σ c_s z_s z_sᵀ), and the first pass's checked
    // observations. A removal whose redundancy number was small makes c_s large and the update less accurate: then the
    // adjustment is computed afresh instead.
    const dd = core.downdate && core.downdate.minRedundancy >= DOWNDATE_MIN_REDUNDANCY ? core.downdate : undefined;
    const after = span(0.92, 1, 'adjustment after removals');
    try {
      pass = run(after, false, dd, pass);
      removals.push(...staged);
    } catch (e) {
      if (!(e instanceof AdjustmentInputError)) throw e;
      for (const r of staged) (r.source === 'observation' ? removedObs : removedFixed).delete(r.index);
      pass = run(after);
    }
  }
  if (mode === 'iterative') {
    for (;;) {
      const { core, obsMap } = pass;
      const k = core.criticalValue;
      let best: { source: 'observation' | 'fixedPoint'; index: number; w: number } | null = null;
      core.observations.forEach((o, j) => {
        const w = o.standardizedResidual;
        if (w !== null && Math.abs(w) > k && (!best || Math.abs(w) > Math.abs(best.w))) best = { source: 'observation', index: obsMap[j], w };
      });
      core.fixedPointObservations.forEach((o) => {
        const w = o.standardizedResidual;
        if (w !== null && Math.abs(w) > k && (!best || Math.abs(w) > Math.abs(best.w))) best = { source: 'fixedPoint', index: o.pointIndex, w };
      });
      if (best === null) break;
      const chosen: { source: 'observation' | 'fixedPoint'; index: number; w: number } = best;
      if (removals.length >= maxRemovals || core.degreesOfFreedom <= 0) {
        stoppedEarly = true;
        break;
      }
      const removal: SnoopingRemoval = { step: removals.length + 1, source: chosen.source, index: chosen.index, standardizedResidual: chosen.w };
      if (chosen.source === 'observation') {
        const ob = input.observations[chosen.index];
        removal.from = ob.from;
        removal.to = ob.to;
        if (ob.id !== undefined) removal.id = ob.id;
        removedObs.set(chosen.index, removal);
      } else {
        removal.code = input.points[chosen.index].code;
        removedFixed.set(chosen.index, removal);
      }
      try {
        const next = run(span(0.92, 1, 'adjustment after removals'));
        removals.push(removal);
        pass = next;
      } catch (e) {
        // The observation cannot go without leaving a part of the network undetermined: keep it, stop here.
        if (!(e instanceof AdjustmentInputError)) throw e;
        removedObs.delete(chosen.index);
        removedFixed.delete(chosen.index);
        stoppedEarly = true;
        break;
      }
    }
  }

  const { core, obsMap } = pass;
  const cOf = new Map(core.points.map((p) => [p.code, p.c]));
  const paramValue = new Map<string, number>();
  for (const d of core.datumOffsets) paramValue.set(d.name, d.value);
  const sharedValue = new Map<string, number>();
  for (const sp of core.sharedParameters) sharedValue.set(sp.name, sp.value);
  // The final pass's observation objects are this function's own: they take their original index in place.
  const byOriginal: (AdjustedObservation | undefined)[] = new Array(nObsAll);
  core.observations.forEach((o, j) => {
    o.index = obsMap[j];
    byOriginal[obsMap[j]] = o;
  });
  progress(reported, 'statistical tests');
  const observations: AdjustedObservation[] = input.observations.map((ob, k) => {
    if ((k & 65535) === 65535) progress(reported, 'statistical tests');
    const kept = byOriginal[k];
    if (kept) return kept;
    const rem = removedObs.get(k)!;
    // A removed observation: its discrepancy to the final adjustment, and its w at removal.
    let model = (cOf.get(ob.to) ?? 0) - (cOf.get(ob.from) ?? 0);
    let shared = 0;
    if (ob.datumOffset !== undefined) model += paramValue.get(ob.datumOffset) ?? 0;
    for (const t of ob.terms ?? []) {
      if (paramValue.has(t.name)) model += t.coefficient * paramValue.get(t.name)!;
      else shared += t.coefficient * (sharedValue.get(t.name) ?? 0);
    }
    const residual = model + shared - ob.deltaC;
    const res: AdjustedObservation = {
      index: k, from: ob.from, to: ob.to, kind: ob.kind ?? 'levelling', deltaC: ob.deltaC,
      residual, sigmaResidual: Number.NaN, redundancy: 0, standardizedResidual: rem.standardizedResidual, suspected: true, removedAtStep: rem.step,
      sigmaAdjusted: Number.NaN, sharedEffect: shared, residualTotal: residual - shared,
    };
    if (ob.id !== undefined) res.id = ob.id;
    return res;
  });
  const fixedPointObservations: FixedPointObservation[] = [];
  const corFixed = new Map(core.fixedPointObservations.map((f) => [f.pointIndex, f]));
  input.points.forEach((pt, i) => {
    const kept = corFixed.get(i);
    if (kept) {
      const { pointIndex: _p, ...rest } = kept;
      fixedPointObservations.push(rest);
      return;
    }
    const rem = removedFixed.get(i);
    if (rem) {
      const residual = (cOf.get(pt.code) ?? 0) - (pt.fixedC as number);
      fixedPointObservations.push({
        code: pt.code, fixedC: pt.fixedC as number, sigmaFixed: pt.sigmaFixed as number, residual, sigmaResidual: Number.NaN, redundancy: 0,
        standardizedResidual: rem.standardizedResidual, suspected: true, removedAtStep: rem.step,
      });
    }
  });
  const points = core.points.map((p, i) => (removedFixed.has(i) && input.points[i].fixedC !== undefined ? { ...p, knownC: input.points[i].fixedC } : p));

  const suspects: SuspectedObservation[] = removals.map((r) => {
    const s: SuspectedObservation = { source: r.source, index: r.index, standardizedResidual: r.standardizedResidual };
    if (r.source === 'observation') {
      s.from = r.from;
      s.to = r.to;
      if (r.id !== undefined) s.id = r.id;
    } else {
      s.code = r.code;
      s.index = fixedPointObservations.findIndex((f) => f.code === r.code);
    }
    return s;
  });
  let maxRemainingW: number | null = null;
  for (const list of [core.observations, core.fixedPointObservations]) {
    for (const o of list) {
      if (o.standardizedResidual !== null && (maxRemainingW === null || Math.abs(o.standardizedResidual) > maxRemainingW)) maxRemainingW = Math.abs(o.standardizedResidual);
    }
  }
  if (mode === 'none') {
    // Test only: every |w| above the critical value is flagged, nothing is removed (no iteration, not Baarda's procedure).
    for (const o of observations) o.suspected = o.standardizedResidual !== null && Math.abs(o.standardizedResidual) > core.criticalValue;
    for (const o of fixedPointObservations) o.suspected = o.standardizedResidual !== null && Math.abs(o.standardizedResidual) > core.criticalValue;
  }
  progress(1, 'statistical tests');
  const result: AdjustmentResult = {
    constraint: core.constraint,
    points,
    observations,
    fixedPointObservations,
    datumOffsets: core.datumOffsets,
    sharedParameters: core.sharedParameters,
    differences: core.differences,
    unknowns: core.unknowns,
    degreesOfFreedom: core.degreesOfFreedom,
    vtpv: core.vtpv,
    sigma0: core.sigma0,
    globalTest: core.globalTest,
    snooping: { alpha0: core.alpha0, criticalValue: core.criticalValue, suspects, removals, stoppedEarly, maxRemainingW, initial },
    factorNonZeros: core.factorNonZeros,
  };
  if (core.heldPoint !== undefined) result.heldPoint = core.heldPoint;
  return result;
}

interface CoreResult {
  constraint: 'fixed' | 'minimum';
  heldPoint?: string;
  points: AdjustedPoint[];
  observations: AdjustedObservation[];
  fixedPointObservations: (FixedPointObservation & { pointIndex: number })[];
  datumOffsets: AdjustedDatumOffset[];
  sharedParameters: AdjustedSharedParameter[];
  differences: AdjustedDifference[];
  unknowns: number;
  degreesOfFreedom: number;
  vtpv: number;
  sigma0: number | null;
  globalTest: GlobalTest | null;
  alpha0: number;
  criticalValue: number;
  factorNonZeros: number;
  ordering: Ordering;
  /** Removals found by rank-one screening (indices local to this pass), in order. */
  screened: { source: 'observation' | 'fixedPoint'; index: number; w: number }[];
  /** This pass's factor and selected inverse with the screening's rank-one downdates, for the adjustment without the screened rows. */
  downdate?: Downdate;
  /** This pass's checked observations, for the adjustment without the screened rows. */
  prepared?: Prepared;
}

/** A pass's observations as checked and resolved into point and parameter numbers (pass-local observation numbers). */
interface Prepared {
  pointIndex: Map<string, number>;
  obsFrom: Int32Array;
  obsTo: Int32Array;
  termPtr: Int32Array;
  termSlot: number[];
  termCoef: number[];
}

/** Prepared of an earlier pass over the same points and options, with from[k] = its number of this pass's observation k. */
interface Reuse {
  prepared: Prepared;
  from: Int32Array;
}

/**
 * N⁻¹ after removing the screened rows, as Q + Σ c_s z_s z_sᵀ (sequential Sherman–Morrison, z_s = Q_{s−1} a_s,
 * c_s = p_s / r_s with r_s the redundancy number at removal s).
 */
interface Downdate {
  factor: LdlFactor;
  inverse: SelectedInverse;
  zs: Float64Array[];
  cs: number[];
  /** Smallest r_s among the removals: a small one amplifies rounding in c_s. */
  minRedundancy: number;
}

/** One least-squares adjustment (no iteration). `obsPath` maps observation positions to the caller's indices for messages. */
function adjustCore(
  input: AdjustmentInput, progress: (fraction: number, stage: AdjustmentStage) => void, obsPath: number[], ordering?: Ordering, screen = false, screenBudget = 0,
  downdated?: Downdate, reuse?: Reuse,
): CoreResult {
  const options = input.options ?? {};
  const alpha = options.alpha ?? 0.05;
  const alpha0 = options.alphaSnooping ?? 0.001;
  const constraint = options.constraint ?? 'fixed';
  const { points, observations } = input;
  const nPoints = points.length;
  const nObs = observations.length;
  const obsPathOf = (k: number) => `observations[${obsPath[k] ?? k}]`;

  progress(0, 'validation');
  if (!(alpha > 0 && alpha < 1)) throw invalid('options.alpha', 'alpha must lie in (0, 1)');
  if (!(alpha0 > 0 && alpha0 < 1)) throw invalid('options.alphaSnooping', 'alphaSnooping must lie in (0, 1)');

  // With `reuse` the points are those of the earlier pass (a removed weighted fixed value only drops fixedC and sigmaFixed).
  const pointIndex = reuse ? reuse.prepared.pointIndex : new Map<string, number>();
  if (!reuse) points.forEach((pt, i) => {
    if (typeof pt.code !== 'string' || pt.code.length === 0) throw invalid(`points[${i}].code`, 'point code is empty');
    if (pointIndex.has(pt.code)) throw invalid(`points[${i}].code`, `duplicate point code ${pt.code}`);
    pointIndex.set(pt.code, i);
    if (pt.fixedC !== undefined && !Number.isFinite(pt.fixedC)) throw invalid(`points[${i}].fixedC`, 'fixedC is not finite');
    if (pt.sigmaFixed !== undefined) {
      if (!(Number.isFinite(pt.sigmaFixed) && pt.sigmaFixed >= 0)) throw invalid(`points[${i}].sigmaFixed`, 'sigmaFixed must be ≥ 0');
      if (pt.fixedC === undefined) throw invalid(`points[${i}].sigmaFixed`, 'sigmaFixed given without fixedC');
    }
  });

  const offsetNames = options.datumOffsets ?? [];
  const offsetIndex = new Map<string, number>();
  offsetNames.forEach((name, k) => {
    if (offsetIndex.has(name)) throw invalid(`options.datumOffsets[${k}]`, `duplicate datum offset ${name}`);
    offsetIndex.set(name, k);
  });
  const shared = options.sharedParameters ?? [];
  const sharedIndex = new Map<string, number>();
  shared.forEach((sp, j) => {
    if (typeof sp.name !== 'string' || sp.name.length === 0) throw invalid(`options.sharedParameters[${j}].name`, 'name is empty');
    if (sharedIndex.has(sp.name) || offsetIndex.has(sp.name)) throw invalid(`options.sharedParameters[${j}].name`, `duplicate parameter ${sp.name}`);
    if (!(Number.isFinite(sp.sigma) && sp.sigma > 0)) throw invalid(`options.sharedParameters[${j}].sigma`, 'sigma must be > 0');
    sharedIndex.set(sp.name, j);
  });

  const obsFrom = new Int32Array(nObs);
  const obsTo = new Int32Array(nObs);
  const offsetUse = new Int32Array(offsetNames.length);
  const sharedUse = new Int32Array(shared.length);
  // Parameter terms of each observation (CSR): parameter slot (offsets first, then shared) and coefficient.
  const termPtr = new Int32Array(nObs + 1);
  const termSlot: number[] = [];
  const termCoef: number[] = [];
  const countUses = (ob: NetworkObservation): void => {
    const terms: ParameterTerm[] = ob.datumOffset !== undefined ? [{ name: ob.datumOffset, coefficient: 1 }, ...(ob.terms ?? [])] : (ob.terms ?? []);
    for (const term of terms) {
      const o = offsetIndex.get(term.name);
      const j = sharedIndex.get(term.name);
      if (o !== undefined) offsetUse[o]++;
      else if (j !== undefined) sharedUse[j]++;
    }
  };
  if (reuse) {
    const { prepared: pr, from } = reuse;
    for (let k = 0; k < nObs; k++) {
      const k1 = from[k];
      obsFrom[k] = pr.obsFrom[k1];
      obsTo[k] = pr.obsTo[k1];
      for (let p = pr.termPtr[k1]; p < pr.termPtr[k1 + 1]; p++) {
        termSlot.push(pr.termSlot[p]);
        termCoef.push(pr.termCoef[p]);
      }
      termPtr[k + 1] = termSlot.length;
      const ob = observations[k];
      if (ob.datumOffset !== undefined || (ob.terms !== undefined && ob.terms.length > 0)) countUses(ob);
    }
  }
  // The field path of a message is only written when there is one to give (no string per observation otherwise).
  if (!reuse) observations.forEach((ob, k) => {
    const f = pointIndex.get(ob.from);
    const t = pointIndex.get(ob.to);
    if (f === undefined) throw invalid(`${obsPathOf(k)}.from`, `unknown point ${ob.from}`);
    if (t === undefined) throw invalid(`${obsPathOf(k)}.to`, `unknown point ${ob.to}`);
    if (f === t) throw invalid(`${obsPathOf(k)}.to`, 'observation joins a point to itself');
    if (!Number.isFinite(ob.deltaC)) throw invalid(`${obsPathOf(k)}.deltaC`, 'deltaC is not finite');
    if (!(Number.isFinite(ob.sigma) && ob.sigma > 0)) throw invalid(`${obsPathOf(k)}.sigma`, 'sigma must be > 0');
    obsFrom[k] = f;
    obsTo[k] = t;
    if (ob.datumOffset === undefined && (ob.terms === undefined || ob.terms.length === 0)) {
      termPtr[k + 1] = termSlot.length;
      return;
    }
    const path = obsPathOf(k);
    const terms: ParameterTerm[] = ob.datumOffset !== undefined ? [{ name: ob.datumOffset, coefficient: 1 }, ...(ob.terms ?? [])] : (ob.terms ?? []);
    const seen = new Map<number, number>();
    terms.forEach((term, s) => {
      const tp = ob.datumOffset !== undefined && s === 0 ? `${path}.datumOffset` : `${path}.terms[${ob.datumOffset !== undefined ? s - 1 : s}]`;
      if (!Number.isFinite(term.coefficient)) throw invalid(`${tp}.coefficient`, 'coefficient is not finite');
      const o = offsetIndex.get(term.name);
      const j = sharedIndex.get(term.name);
      let slot: number;
      if (o !== undefined) { slot = o; offsetUse[o]++; }
      else if (j !== undefined) { slot = offsetNames.length + j; sharedUse[j]++; }
      else throw invalid(tp, `parameter ${term.name} is not declared`);
      // Two terms naming the same parameter add up.
      const at = seen.get(slot);
      if (at !== undefined) termCoef[at] += term.coefficient;
      else { seen.set(slot, termSlot.length); termSlot.push(slot); termCoef.push(term.coefficient); }
    });
    termPtr[k + 1] = termSlot.length;
  });
  offsetNames.forEach((name, k) => {
    if (offsetUse[k] === 0) throw invalid(`options.datumOffsets[${k}]`, `datum offset ${name} is used by no observation`);
  });

  // Datum role of each point.
  const HELD = 1;
  const WEIGHTED = 2;
  const role = new Uint8Array(nPoints);
  let heldPoint: string | undefined;
  if (constraint === 'minimum') {
    const first = points.findIndex((pt) => pt.fixedC !== undefined);
    if (first < 0) throw invalid('points', "the 'minimum' constraint needs at least one point with fixedC");
    role[first] = HELD;
    heldPoint = points[first].code;
  } else {
    points.forEach((pt, i) => {
      if (pt.fixedC !== undefined) role[i] = pt.sigmaFixed !== undefined && pt.sigmaFixed > 0 ? WEIGHTED : HELD;
    });
  }

  checkConnectivity(points, obsFrom, obsTo, role);

  progress(0.02, 'assembly');
  const c0 = approximateValues(points, obsFrom, obsTo, observations, role);

  // Unknowns: free and weighted points, then datum offsets, then shared parameters.
  const unknownOfPoint = new Int32Array(nPoints).fill(-1);
  const unknownNames: string[] = [];
  for (let i = 0; i < nPoints; i++) {
    if (role[i] !== HELD) {
      unknownOfPoint[i] = unknownNames.length;
      unknownNames.push(points[i].code);
    }
  }
  const firstParamUnknown = unknownNames.length;
  for (const name of offsetNames) unknownNames.push(`datum offset ${name}`);
  for (const sp of shared) unknownNames.push(`shared parameter ${sp.name}`);
  const nUnknowns = unknownNames.length;
  const firstSharedUnknown = firstParamUnknown + offsetNames.length;

  const weightedIdx: number[] = [];
  for (let i = 0; i < nPoints; i++) if (role[i] === WEIGHTED) weightedIdx.push(i);
  const nPseudo = weightedIdx.length;
  const nShared = shared.length;

  // Reduced observations l0 = observed − computed from approximate values (parameters start at 0).
  const l0 = new Float64Array(nObs);
  const weight = new Float64Array(nObs);
  for (let k = 0; k < nObs; k++) {
    l0[k] = observations[k].deltaC - (c0[obsTo[k]] - c0[obsFrom[k]]);
    weight[k] = 1 / (observations[k].sigma * observations[k].sigma);
  }

  let maxTerms = 0;
  let maxTriplets = nPseudo + nShared;
  for (let k = 0; k < nObs; k++) {
    const m = 2 + termPtr[k + 1] - termPtr[k];
    if (m > maxTerms) maxTerms = m;
    maxTriplets += (m * (m + 1)) / 2;
  }
  // After screened removals the factor and inverse are the screening's (with its downdates): N is not assembled, its
  // products come from the rows of A (normalTimes).
  const assemble = !downdated;
  const tr = new Int32Array(assemble ? maxTriplets : 0);
  const tc = new Int32Array(assemble ? maxTriplets : 0);
  const tv = new Float64Array(assemble ? maxTriplets : 0);
  let nt = 0;
  const rhs = new Float64Array(nUnknowns);
  const idx = new Int32Array(Math.max(maxTerms, 2));
  const coef = new Float64Array(Math.max(maxTerms, 2));
  const obsUnknowns = (k: number): number => {
    let m = 0;
    const uf = unknownOfPoint[obsFrom[k]];
    const ut = unknownOfPoint[obsTo[k]];
    if (uf >= 0) { idx[m] = uf; coef[m] = -1; m++; }
    if (ut >= 0) { idx[m] = ut; coef[m] = 1; m++; }
    for (let p = termPtr[k]; p < termPtr[k + 1]; p++) { idx[m] = firstParamUnknown + termSlot[p]; coef[m] = termCoef[p]; m++; }
    return m;
  };
  // The design matrix A by rows (CSR), for the loops that read every row many times.
  const aPtr = new Int32Array(nObs + 1);
  const aCol = new Int32Array(2 * nObs + termPtr[nObs]);
  const aVal = new Float64Array(aCol.length);
  for (let k = 0; k < nObs; k++) {
    const m = obsUnknowns(k);
    let at = aPtr[k];
    for (let s = 0; s < m; s++, at++) { aCol[at] = idx[s]; aVal[at] = coef[s]; }
    aPtr[k + 1] = at;
  }
  const rowTimes = (k: number, vec: Float64Array): number => {
    let d = 0;
    for (let p = aPtr[k]; p < aPtr[k + 1]; p++) d += aVal[p] * vec[aCol[p]];
    return d;
  };
  for (let k = 0; k < nObs; k++) {
    const m = obsUnknowns(k);
    const p = weight[k];
    for (let s = 0; s < m; s++) {
      rhs[idx[s]] += p * coef[s] * l0[k];
      if (assemble) for (let t = s; t < m; t++) {
        const a = idx[s] < idx[t] ? idx[s] : idx[t];
        const b = idx[s] < idx[t] ? idx[t] : idx[s];
        tr[nt] = a; tc[nt] = b; tv[nt] = p * coef[s] * coef[t]; nt++;
      }
    }
  }
  const pseudoL0 = new Float64Array(nPseudo);
  const pseudoWeight = new Float64Array(nPseudo);
  weightedIdx.forEach((i, s) => {
    const u = unknownOfPoint[i];
    const sf = points[i].sigmaFixed as number;
    pseudoWeight[s] = 1 / (sf * sf);
    pseudoL0[s] = (points[i].fixedC as number) - c0[i];
    rhs[u] += pseudoWeight[s] * pseudoL0[s];
    if (assemble) { tr[nt] = u; tc[nt] = u; tv[nt] = pseudoWeight[s]; nt++; }
  });
  // Zero-prior pseudo-observations of the shared parameters: s_j = 0 ± σ_j.
  shared.forEach((sp, j) => {
    const u = firstSharedUnknown + j;
    if (assemble) { tr[nt] = u; tc[nt] = u; tv[nt] = 1 / (sp.sigma * sp.sigma); nt++; }
  });
  const normal = assemble ? symmetricFromTriplets(nUnknowns, tr, tc, tv, nt) : null;
  /** b − N·x with N = AᵀPA + the pseudo-observations' weights + the shared parameters' prior weights, row by row. */
  const normalResidual = (x: Float64Array, b: Float64Array): Float64Array => {
    if (normal) return symmetricResidual(normal, x, b);
    const out = Float64Array.from(b);
    for (let k = 0; k < nObs; k++) {
      const t = weight[k] * rowTimes(k, x);
      for (let p = aPtr[k]; p < aPtr[k + 1]; p++) out[aCol[p]] -= aVal[p] * t;
    }
    weightedIdx.forEach((i, s) => {
      const u = unknownOfPoint[i];
      out[u] -= pseudoWeight[s] * x[u];
    });
    shared.forEach((sp, j) => {
      const u = firstSharedUnknown + j;
      out[u] -= x[u] / (sp.sigma * sp.sigma);
    });
    return out;
  };

  let factor: LdlFactor;
  let solveN: (b: Float64Array) => Float64Array;
  if (downdated) {
    // N' = N − Σ p_s a_s a_sᵀ: N'⁻¹ b = N⁻¹ b + Σ c_s z_s (z_sᵀ b) with the screening's z_s = Q_{s−1} a_s, c_s = p_s / r_s.
    factor = downdated.factor;
    const { zs, cs } = downdated;
    solveN = (b) => {
      const x = solve(factor, b);
      // Four z_s per sweep: their products with b, then x += Σ c_s (z_sᵀb) z_s.
      let s2 = 0;
      for (; s2 + 4 <= zs.length; s2 += 4) {
        const [z0, z1, z2, z3] = [zs[s2], zs[s2 + 1], zs[s2 + 2], zs[s2 + 3]];
        let d0 = 0;
        let d1 = 0;
        let d2 = 0;
        let d3 = 0;
        for (let u = 0; u < nUnknowns; u++) {
          const bu = b[u];
          d0 += z0[u] * bu;
          d1 += z1[u] * bu;
          d2 += z2[u] * bu;
          d3 += z3[u] * bu;
        }
        const [f0, f1, f2, f3] = [cs[s2] * d0, cs[s2 + 1] * d1, cs[s2 + 2] * d2, cs[s2 + 3] * d3];
        for (let u = 0; u < nUnknowns; u++) x[u] += f0 * z0[u] + f1 * z1[u] + f2 * z2[u] + f3 * z3[u];
      }
      for (; s2 < zs.length; s2++) {
        const zv = zs[s2];
        let d = 0;
        for (let u = 0; u < nUnknowns; u++) d += zv[u] * b[u];
        const f = cs[s2] * d;
        if (f !== 0) for (let u = 0; u < nUnknowns; u++) x[u] += f * zv[u];
      }
      return x;
    };
  } else {
    const full = normal as SymmetricCsc; // assembled whenever there is no downdate
    progress(0.05, 'ordering');
    const usable = ordering && ordering.perm.length === nUnknowns ? ordering : approximateMinimumDegree(full, (f) => progress(0.05 + 0.15 * f, 'ordering'));
    progress(0.2, 'factorisation');
    try {
      factor = factorize(full, { ordering: usable, onColumns: (f) => progress(0.2 + 0.25 * f, 'factorisation') });
    } catch (e) {
      if (e instanceof SingularMatrixError) {
        throw new AdjustmentInputError(
          `normal equations are singular at unknown ${unknownNames[e.column]}: the observations do not determine it`,
          { reason: 'singular', unknown: unknownNames[e.column] },
        );
      }
      throw e;
    }
    const f0 = factor;
    solveN = (b) => solve(f0, b);
  }

  progress(0.45, 'solution');
  const dx = solveN(rhs);
  // One step of iterative refinement recovers the digits lost to the condition number of N (and to the downdates).
  const resid = normalResidual(dx, rhs);
  const corr = solveN(resid);
  for (let j = 0; j < nUnknowns; j++) dx[j] += corr[j];

  progress(0.47, 'selected inversion');
  const z: SelectedInverse = downdated ? downdated.inverse : selectedInverse(factor, (f) => progress(0.47 + 0.33 * f, 'selected inversion'));
  // Q = N⁻¹ on the pattern of the factor; after downdates Q' = Q + Σ c_s z_s z_sᵀ (same pattern: removing rows only
  // removes entries of N).
  const lowRank = downdated ?? null;
  const entry = (i: number, j: number): number => {
    let e = inverseEntry(z, i, j);
    if (i === j && diagLowRank) return e + diagLowRank[i];
    if (lowRank && !Number.isNaN(e)) for (let s2 = 0; s2 < lowRank.zs.length; s2++) e += lowRank.cs[s2] * lowRank.zs[s2][i] * lowRank.zs[s2][j];
    return e;
  };
  // Q entries outside the factor's pattern come from one extra solve N·q = e_j per column (cached).
  const columns = new Map<number, Float64Array>();
  const q = (i: number, j: number): number => {
    const e = entry(i, j);
    if (!Number.isNaN(e)) return e;
    let col = columns.get(j);
    if (!col) {
      const unit = new Float64Array(nUnknowns);
      unit[j] = 1;
      col = solveN(unit);
      columns.set(j, col);
    }
    return col[i];
  };

  progress(0.8, 'statistical tests');
  // With downdates, aᵀQ'a = aᵀQa + Σ_s c_s (aᵀz_s)², and diag Q' likewise; one z_s at a time keeps the reads local.
  let obsLowRank: Float64Array | null = null;
  let diagLowRank: Float64Array | null = null;
  if (lowRank) {
    obsLowRank = new Float64Array(nObs);
    diagLowRank = new Float64Array(nUnknowns);
    const { zs, cs } = lowRank;
    // Four z_s per sweep over the rows of A.
    let s2 = 0;
    for (; s2 + 4 <= zs.length; s2 += 4) {
      const [z0, z1, z2, z3] = [zs[s2], zs[s2 + 1], zs[s2 + 2], zs[s2 + 3]];
      const [c0s, c1s, c2s, c3s] = [cs[s2], cs[s2 + 1], cs[s2 + 2], cs[s2 + 3]];
      for (let u = 0; u < nUnknowns; u++) diagLowRank[u] += c0s * z0[u] * z0[u] + c1s * z1[u] * z1[u] + c2s * z2[u] * z2[u] + c3s * z3[u] * z3[u];
      for (let k = 0; k < nObs; k++) {
        let d0 = 0;
        let d1 = 0;
        let d2 = 0;
        let d3 = 0;
        for (let p = aPtr[k]; p < aPtr[k + 1]; p++) {
          const col = aCol[p];
          const av = aVal[p];
          d0 += av * z0[col];
          d1 += av * z1[col];
          d2 += av * z2[col];
          d3 += av * z3[col];
        }
        obsLowRank[k] += c0s * d0 * d0 + c1s * d1 * d1 + c2s * d2 * d2 + c3s * d3 * d3;
      }
      progress(0.8, 'statistical tests');
    }
    for (; s2 < zs.length; s2++) {
      const zv = zs[s2];
      const c = cs[s2];
      for (let u = 0; u < nUnknowns; u++) diagLowRank[u] += c * zv[u] * zv[u];
      for (let k = 0; k < nObs; k++) {
        const d = rowTimes(k, zv);
        obsLowRank[k] += c * d * d;
      }
      progress(0.8, 'statistical tests');
    }
  }
  const v = new Float64Array(nObs);
  const r = new Float64Array(nObs);
  const sharedEffect = new Float64Array(nObs);
  let vtpv = 0;
  const { inversePerm } = z.factor.ordering;
  for (let k = 0; k < nObs; k++) {
    const m = obsUnknowns(k);
    let ax = 0;
    let qaa = 0;
    for (let s = 0; s < m; s++) {
      ax += coef[s] * dx[idx[s]];
      if (idx[s] >= firstSharedUnknown) sharedEffect[k] += coef[s] * dx[idx[s]];
      // Q is symmetric: each off-diagonal pair read once, counted twice.
      qaa += coef[s] * coef[s] * z.diag[inversePerm[idx[s]]];
      for (let t = s + 1; t < m; t++) qaa += 2 * coef[s] * coef[t] * inverseEntry(z, idx[s], idx[t]);
    }
    if (obsLowRank) qaa += obsLowRank[k];
    if ((k & 16383) === 16383) progress(0.8 + (0.05 * k) / nObs, 'statistical tests');
    v[k] = ax - l0[k];
    r[k] = 1 - weight[k] * qaa;
    vtpv += weight[k] * v[k] * v[k];
  }
  const pv = new Float64Array(nPseudo);
  const pr = new Float64Array(nPseudo);
  weightedIdx.forEach((i, s) => {
    const u = unknownOfPoint[i];
    pv[s] = dx[u] - pseudoL0[s];
    pr[s] = 1 - pseudoWeight[s] * entry(u, u);
    vtpv += pseudoWeight[s] * pv[s] * pv[s];
  });
  shared.forEach((sp, j) => {
    const sv = dx[firstSharedUnknown + j];
    vtpv += (sv * sv) / (sp.sigma * sp.sigma);
  });

  const dof = nObs + nPseudo + nShared - nUnknowns;
  const sigma0 = dof > 0 ? Math.sqrt(vtpv / dof) : null;
  let globalTest: GlobalTest | null = null;
  if (dof > 0) {
    const lower = chiSquareQuantile(alpha / 2, dof);
    const upper = chiSquareQuantile(1 - alpha / 2, dof);
    globalTest = { statistic: vtpv, degreesOfFreedom: dof, alpha, lower, upper, critical: upper, passed: vtpv >= lower && vtpv <= upper };
  }
  const kCrit = normalQuantile(1 - alpha0 / 2);

  // Screening for Baarda's iteration without re-factorising: removing row k is a rank-one downdate of N, so with
  // z = Q·a_k (Sherman–Morrison) x' = x + p_k·v_k/r_k·z, v_i' = v_i + p_k·v_k/r_k·(a_iᵀz), r_i' = r_i − p_i·p_k·(a_iᵀz)²/r_k,
  // Ω' = Ω − p_k·v_k²/r_k. Q after several removals is Q_0 + Σ c_j·z_j·z_jᵀ. The caller then
  // adjusts without the screened rows, reusing this factor and inverse with these downdates (see Downdate).
  const screened: { source: 'observation' | 'fixedPoint'; index: number; w: number }[] = [];
  let downdate: Downdate | undefined;
  if (screen && dof > 0) {
    progress(0.85, 'outlier screening');
    const nRows = nObs + nPseudo;
    const rv = new Float64Array(nRows);
    const rr = new Float64Array(nRows);
    const rp = new Float64Array(nRows);
    const rs = new Float64Array(nRows);
    const gone = new Uint8Array(nRows);
    for (let k = 0; k < nObs; k++) { rv[k] = v[k]; rr[k] = r[k]; rp[k] = weight[k]; rs[k] = observations[k].sigma; }
    weightedIdx.forEach((i, s2) => { rv[nObs + s2] = pv[s2]; rr[nObs + s2] = pr[s2]; rp[nObs + s2] = pseudoWeight[s2]; rs[nObs + s2] = points[i].sigmaFixed as number; });
    const rowDot = (row: number, vec: Float64Array): number => {
      if (row >= nObs) return vec[unknownOfPoint[weightedIdx[row - nObs]]];
      return rowTimes(row, vec);
    };
    const zs: Float64Array[] = [];
    const cs: number[] = [];
    let minRedundancy = 1;
    let dofLeft = dof;
    for (let step = 0; step < screenBudget && dofLeft > 0; step++) {
      let best = -1;
      let bestW = 0;
      for (let i = 0; i < nRows; i++) {
        if (gone[i] || rr[i] < REDUNDANCY_FLOOR) continue;
        const w = rv[i] / (rs[i] * Math.sqrt(Math.min(rr[i], 1)));
        if (Math.abs(w) > kCrit && Math.abs(w) > Math.abs(bestW)) { best = i; bestW = w; }
      }
      if (best < 0) break;
      screened.push(best < nObs ? { source: 'observation', index: best, w: bestW } : { source: 'fixedPoint', index: weightedIdx[best - nObs], w: bestW });
      gone[best] = 1;
      dofLeft--;
      // z = Q·a_best with the accumulated downdates.
      const a = new Float64Array(nUnknowns);
      if (best >= nObs) a[unknownOfPoint[weightedIdx[best - nObs]]] = 1;
      else { const m = obsUnknowns(best); for (let s2 = 0; s2 < m; s2++) a[idx[s2]] += coef[s2]; }
      // a has a few non-zeros: z_jᵀa is read at those only.
      const aIdx: number[] = [];
      for (let u = 0; u < nUnknowns; u++) if (a[u] !== 0) aIdx.push(u);
      const z = solve(factor, a);
      // z += Σ_j c_j (z_jᵀa) z_j, four earlier z_j per sweep over z.
      const fs = new Float64Array(zs.length);
      for (let j = 0; j < zs.length; j++) {
        let d = 0;
        for (const u of aIdx) d += zs[j][u] * a[u];
        fs[j] = cs[j] * d;
      }
      let j4 = 0;
      for (; j4 + 4 <= zs.length; j4 += 4) {
        const [z0, z1, z2, z3] = [zs[j4], zs[j4 + 1], zs[j4 + 2], zs[j4 + 3]];
        const [f0, f1, f2, f3] = [fs[j4], fs[j4 + 1], fs[j4 + 2], fs[j4 + 3]];
        for (let u = 0; u < nUnknowns; u++) z[u] += f0 * z0[u] + f1 * z1[u] + f2 * z2[u] + f3 * z3[u];
      }
      for (; j4 < zs.length; j4++) {
        const zj = zs[j4];
        const f = fs[j4];
        if (f !== 0) for (let u = 0; u < nUnknowns; u++) z[u] += f * zj[u];
      }
      const c = rp[best] / rr[best];
      if (rr[best] < minRedundancy) minRedundancy = rr[best];
      const g = c * rv[best];
      for (let i = 0; i < nRows; i++) {
        if (gone[i]) continue;
        const az = rowDot(i, z);
        rv[i] += g * az;
        rr[i] -= rp[i] * c * az * az;
      }
      zs.push(z);
      cs.push(c);
      progress(0.85 + (0.15 * (step + 1)) / Math.max(screenBudget, 1), 'outlier screening');
    }
    if (zs.length > 0) downdate = { factor, inverse: z, zs, cs, minRedundancy };
  }

  const analyse = (residual: number, sigma: number, redundancy: number): Omit<ResidualAnalysis, 'suspected' | 'removedAtStep'> => {
    const rr = redundancy < REDUNDANCY_FLOOR ? 0 : Math.min(redundancy, 1);
    const sigmaResidual = sigma * Math.sqrt(rr);
    const w = rr > 0 ? residual / sigmaResidual : null;
    return { residual, sigmaResidual, redundancy: rr, standardizedResidual: w };
  };

  // The point and observation lists are built when first read: the pass that screens for outliers is followed by the
  // adjustment without them, and then only that one's lists are ever read.
  const adjustedC = (i: number): number => (unknownOfPoint[i] >= 0 ? c0[i] + dx[unknownOfPoint[i]] : c0[i]);
  const shapePoints = (): AdjustedPoint[] => {
    progress(0.99, 'statistical tests');
    return points.map((pt, i) => {
      const u = unknownOfPoint[i];
      const sigma = u >= 0 ? Math.sqrt(Math.max(entry(u, u), 0)) : 0;
      const res: AdjustedPoint = {
        code: pt.code,
        c: adjustedC(i),
        sigma,
        sigmaScaled: sigma0 === null ? null : sigma * sigma0,
        datum: role[i] === HELD ? 'held' : role[i] === WEIGHTED ? 'weighted' : 'free',
      };
      if (pt.fixedC !== undefined) res.knownC = pt.fixedC;
      return res;
    });
  };
  const shapeObservations = (): AdjustedObservation[] => {
    progress(0.99, 'statistical tests');
    return observations.map((ob, k) => {
      if ((k & 65535) === 65535) progress(0.99, 'statistical tests');
      const rk = r[k] < REDUNDANCY_FLOOR ? 0 : Math.min(r[k], 1);
      const sigmaResidual = ob.sigma * Math.sqrt(rk);
      const res: AdjustedObservation = {
        index: k,
        from: ob.from,
        to: ob.to,
        kind: ob.kind ?? 'levelling',
        deltaC: ob.deltaC,
        residual: v[k],
        sigmaResidual,
        redundancy: rk,
        standardizedResidual: rk > 0 ? v[k] / sigmaResidual : null,
        suspected: false,
        removedAtStep: null,
        sigmaAdjusted: ob.sigma * Math.sqrt(Math.max(1 - rk, 0)),
        sharedEffect: sharedEffect[k],
        residualTotal: v[k] - sharedEffect[k],
      };
      if (ob.id !== undefined) res.id = ob.id;
      return res;
    });
  };

  progress(0.99, 'statistical tests');
  const outFixed = weightedIdx.map((i, s) => ({
    pointIndex: i,
    code: points[i].code,
    fixedC: points[i].fixedC as number,
    sigmaFixed: points[i].sigmaFixed as number,
    ...analyse(pv[s], points[i].sigmaFixed as number, pr[s]),
    suspected: false,
    removedAtStep: null,
  }));

  const outOffsets: AdjustedDatumOffset[] = offsetNames.map((name, k) => {
    const u = firstParamUnknown + k;
    const sigma = Math.sqrt(Math.max(entry(u, u), 0));
    return { name, value: dx[u], sigma, sigmaScaled: sigma0 === null ? null : sigma * sigma0 };
  });
  const outShared: AdjustedSharedParameter[] = shared.map((sp, j) => {
    const u = firstSharedUnknown + j;
    return { name: sp.name, value: dx[u], sigma: Math.sqrt(Math.max(entry(u, u), 0)), priorSigma: sp.sigma, observations: sharedUse[j] };
  });

  const outDiffs: AdjustedDifference[] = (options.differences ?? []).map((d, j) => {
    const f = pointIndex.get(d.from);
    const t = pointIndex.get(d.to);
    if (f === undefined) throw invalid(`options.differences[${j}].from`, `unknown point ${d.from}`);
    if (t === undefined) throw invalid(`options.differences[${j}].to`, `unknown point ${d.to}`);
    const uf = unknownOfPoint[f];
    const ut = unknownOfPoint[t];
    const qff = uf >= 0 ? entry(uf, uf) : 0;
    const qtt = ut >= 0 ? entry(ut, ut) : 0;
    const qft = uf >= 0 && ut >= 0 && uf !== ut ? q(ut, uf) : uf >= 0 && uf === ut ? qff : 0;
    return {
      from: d.from,
      to: d.to,
      deltaC: adjustedC(t) - adjustedC(f),
      sigma: Math.sqrt(Math.max(qff + qtt - 2 * qft, 0)),
      sigmaIgnoringCovariance: Math.sqrt(Math.max(qff, 0) + Math.max(qtt, 0)),
    };
  });

  let outPoints: AdjustedPoint[] | undefined;
  let outObs: AdjustedObservation[] | undefined;
  const result: CoreResult = {
    constraint,
    get points() {
      return (outPoints ??= shapePoints());
    },
    get observations() {
      return (outObs ??= shapeObservations());
    },
    fixedPointObservations: outFixed,
    datumOffsets: outOffsets,
    sharedParameters: outShared,
    differences: outDiffs,
    unknowns: nUnknowns,
    degreesOfFreedom: dof,
    vtpv,
    sigma0,
    globalTest,
    alpha0,
    criticalValue: kCrit,
    factorNonZeros: factor.colPtr[factor.n],
    ordering: factor.ordering,
    screened,
  };
  if (downdate) result.downdate = downdate;
  if (screen) result.prepared = { pointIndex, obsFrom, obsTo, termPtr, termSlot, termCoef };
  if (heldPoint !== undefined) result.heldPoint = heldPoint;
  return result;
}

function invalid(path: string, message: string): AdjustmentInputError {
  return new AdjustmentInputError(`${path}: ${message}`, { reason: 'invalid', path });
}

function findRoot(parent: Int32Array, i: number): number {
  let root = i;
  while (parent[root] !== root) root = parent[root];
  while (parent[i] !== root) {
    const nextI = parent[i];
    parent[i] = root;
    i = nextI;
  }
  return root;
}

/** Union-find over the points; every connected part must contain a datum point. */
function checkConnectivity(points: NetworkPoint[], from: Int32Array, to: Int32Array, role: Uint8Array): void {
  const n = points.length;
  const parent = new Int32Array(n);
  for (let i = 0; i < n; i++) parent[i] = i;
  for (let k = 0; k < from.length; k++) {
    const a = findRoot(parent, from[k]);
    const b = findRoot(parent, to[k]);
    if (a !== b) parent[a] = b;
  }
  const hasDatum = new Uint8Array(n);
  for (let i = 0; i < n; i++) if (role[i] !== 0) hasDatum[findRoot(parent, i)] = 1;
  const parts = new Map<number, { codes: string[]; count: number }>();
  for (let i = 0; i < n; i++) {
    const root = findRoot(parent, i);
    if (hasDatum[root]) continue;
    let part = parts.get(root);
    if (!part) {
      part = { codes: [], count: 0 };
      parts.set(root, part);
    }
    if (part.codes.length < NAMED_CODES) part.codes.push(points[i].code);
    part.count++;
  }
  if (parts.size > 0) {
    const list = [...parts.values()];
    const first = list[0];
    const more = first.count > first.codes.length ? `, … (${first.count} points)` : ` (${first.count} point${first.count > 1 ? 's' : ''})`;
    const others = list.length > 1 ? `; ${list.length - 1} more part(s) without datum` : '';
    throw new AdjustmentInputError(`network part without datum point: ${first.codes.join(', ')}${more}${others}`, {
      reason: 'disconnected',
      parts: list,
    });
  }
}

/** Approximate C by breadth-first propagation of observed ΔC from the datum points. */
function approximateValues(
  points: NetworkPoint[],
  from: Int32Array,
  to: Int32Array,
  observations: NetworkObservation[],
  role: Uint8Array,
): Float64Array {
  const n = points.length;
  const deg = new Int32Array(n + 1);
  for (let k = 0; k < from.length; k++) {
    deg[from[k] + 1]++;
    deg[to[k] + 1]++;
  }
  for (let i = 0; i < n; i++) deg[i + 1] += deg[i];
  const adjObs = new Int32Array(2 * from.length);
  const fill = deg.slice(0, n);
  for (let k = 0; k < from.length; k++) {
    adjObs[fill[from[k]]++] = k;
    adjObs[fill[to[k]]++] = k;
  }
  const c0 = new Float64Array(n);
  const seen = new Uint8Array(n);
  const queue = new Int32Array(n);
  let qh = 0;
  let qt = 0;
  for (let i = 0; i < n; i++) {
    if (role[i] !== 0) {
      c0[i] = points[i].fixedC as number;
      seen[i] = 1;
      queue[qt++] = i;
    }
  }
  while (qh < qt) {
    const i = queue[qh++];
    for (let p = deg[i]; p < deg[i + 1]; p++) {
      const k = adjObs[p];
      const j = from[k] === i ? to[k] : from[k];
      if (seen[j]) continue;
      seen[j] = 1;
      c0[j] = from[k] === i ? c0[i] + observations[k].deltaC : c0[i] - observations[k].deltaC;
      queue[qt++] = j;
    }
  }
  return c0;
}

/** b − A·x for a symmetric CSC holding both triangles. */
function symmetricResidual(a: SymmetricCsc, x: Float64Array, b: Float64Array): Float64Array {
  const out = Float64Array.from(b);
  for (let j = 0; j < a.n; j++) {
    const xj = x[j];
    for (let p = a.colPtr[j]; p < a.colPtr[j + 1]; p++) out[a.rowIdx[p]] -= a.values[p] * xj;
  }
  return out;
}
