// Least-squares adjustment of a levelling network in geopotential numbers (Gauss–Markov model, observation equations).
// Model and statistics: Ghilani, "Adjustment Computations", 6th ed., Wiley 2017, ch. 12 (level nets) and ch. 21 (blunder detection);
// Baarda, "A testing procedure for use in geodetic networks", Netherlands Geodetic Commission, Publ. on Geodesy 2(5), 1968 (w-test).

import { chiSquareQuantile, normalQuantile } from '../distributions';
import {
  factorize,
  inverseEntry,
  selectedInverse,
  SingularMatrixError,
  solve,
  symmetricFromTriplets,
  type SymmetricCsc,
} from './sparse-ldl';

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
}

export type AdjustmentStage =
  | 'validation'
  | 'assembly'
  | 'ordering and factorisation'
  | 'solution'
  | 'selected inversion'
  | 'statistical tests';

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
  /** w = v/σ_v with σ0 = 1; null when r ≈ 0 (observation not controlled). */
  standardizedResidual: number | null;
  suspected: boolean;
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
  snooping: { alpha0: number; criticalValue: number; suspects: SuspectedObservation[] };
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
/** Below this a redundancy number is treated as zero: rounding noise of 1 − p·q (common practice). */
const REDUNDANCY_FLOOR = 1e-10;

export function adjustNetwork(input: AdjustmentInput): AdjustmentResult {
  const options = input.options ?? {};
  const alpha = options.alpha ?? 0.05;
  const alpha0 = options.alphaSnooping ?? 0.001;
  const constraint = options.constraint ?? 'fixed';
  const progress = options.onProgress ?? (() => undefined);
  const { points, observations } = input;
  const nPoints = points.length;
  const nObs = observations.length;

  progress(0, 'validation');
  if (!(alpha > 0 && alpha < 1)) throw invalid('options.alpha', 'alpha must lie in (0, 1)');
  if (!(alpha0 > 0 && alpha0 < 1)) throw invalid('options.alphaSnooping', 'alphaSnooping must lie in (0, 1)');

  const pointIndex = new Map<string, number>();
  points.forEach((pt, i) => {
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

  const obsFrom = new Int32Array(nObs);
  const obsTo = new Int32Array(nObs);
  const obsOffset = new Int32Array(nObs).fill(-1);
  const offsetUse = new Int32Array(offsetNames.length);
  observations.forEach((ob, k) => {
    const f = pointIndex.get(ob.from);
    const t = pointIndex.get(ob.to);
    if (f === undefined) throw invalid(`observations[${k}].from`, `unknown point ${ob.from}`);
    if (t === undefined) throw invalid(`observations[${k}].to`, `unknown point ${ob.to}`);
    if (f === t) throw invalid(`observations[${k}].to`, 'observation joins a point to itself');
    if (!Number.isFinite(ob.deltaC)) throw invalid(`observations[${k}].deltaC`, 'deltaC is not finite');
    if (!(Number.isFinite(ob.sigma) && ob.sigma > 0)) throw invalid(`observations[${k}].sigma`, 'sigma must be > 0');
    obsFrom[k] = f;
    obsTo[k] = t;
    if (ob.datumOffset !== undefined) {
      const o = offsetIndex.get(ob.datumOffset);
      if (o === undefined) throw invalid(`observations[${k}].datumOffset`, `datum offset ${ob.datumOffset} is not declared`);
      obsOffset[k] = o;
      offsetUse[o]++;
    }
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

  progress(0.05, 'assembly');
  const c0 = approximateValues(points, obsFrom, obsTo, observations, role);

  // Unknowns: free and weighted points, then datum offsets.
  const unknownOfPoint = new Int32Array(nPoints).fill(-1);
  const unknownNames: string[] = [];
  for (let i = 0; i < nPoints; i++) {
    if (role[i] !== HELD) {
      unknownOfPoint[i] = unknownNames.length;
      unknownNames.push(points[i].code);
    }
  }
  const firstOffsetUnknown = unknownNames.length;
  for (const name of offsetNames) unknownNames.push(`datum offset ${name}`);
  const nUnknowns = unknownNames.length;

  const weightedIdx: number[] = [];
  for (let i = 0; i < nPoints; i++) if (role[i] === WEIGHTED) weightedIdx.push(i);
  const nPseudo = weightedIdx.length;

  // Reduced observations l0 = observed − computed from approximate values (offsets start at 0).
  const l0 = new Float64Array(nObs);
  const weight = new Float64Array(nObs);
  for (let k = 0; k < nObs; k++) {
    l0[k] = observations[k].deltaC - (c0[obsTo[k]] - c0[obsFrom[k]]);
    weight[k] = 1 / (observations[k].sigma * observations[k].sigma);
  }

  const maxTriplets = 6 * nObs + nPseudo;
  const tr = new Int32Array(maxTriplets);
  const tc = new Int32Array(maxTriplets);
  const tv = new Float64Array(maxTriplets);
  let nt = 0;
  const rhs = new Float64Array(nUnknowns);
  const idx = [0, 0, 0];
  const coef = [0, 0, 0];
  const obsUnknowns = (k: number): number => {
    let m = 0;
    const uf = unknownOfPoint[obsFrom[k]];
    const ut = unknownOfPoint[obsTo[k]];
    if (uf >= 0) { idx[m] = uf; coef[m] = -1; m++; }
    if (ut >= 0) { idx[m] = ut; coef[m] = 1; m++; }
    if (obsOffset[k] >= 0) { idx[m] = firstOffsetUnknown + obsOffset[k]; coef[m] = 1; m++; }
    return m;
  };
  for (let k = 0; k < nObs; k++) {
    const m = obsUnknowns(k);
    const p = weight[k];
    for (let s = 0; s < m; s++) {
      rhs[idx[s]] += p * coef[s] * l0[k];
      for (let t = s; t < m; t++) {
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
    tr[nt] = u; tc[nt] = u; tv[nt] = pseudoWeight[s]; nt++;
  });
  const normal = symmetricFromTriplets(nUnknowns, tr, tc, tv, nt);

  progress(0.15, 'ordering and factorisation');
  let factor;
  try {
    factor = factorize(normal);
  } catch (e) {
    if (e instanceof SingularMatrixError) {
      throw new AdjustmentInputError(
        `normal equations are singular at unknown ${unknownNames[e.column]}: the observations do not determine it`,
        { reason: 'singular', unknown: unknownNames[e.column] },
      );
    }
    throw e;
  }

  progress(0.45, 'solution');
  const dx = solve(factor, rhs);
  // One step of iterative refinement recovers the digits lost to the condition number of N.
  const resid = symmetricResidual(normal, dx, rhs);
  const corr = solve(factor, resid);
  for (let j = 0; j < nUnknowns; j++) dx[j] += corr[j];

  progress(0.5, 'selected inversion');
  const z = selectedInverse(factor);

  progress(0.85, 'statistical tests');
  const v = new Float64Array(nObs);
  const r = new Float64Array(nObs);
  let vtpv = 0;
  for (let k = 0; k < nObs; k++) {
    const m = obsUnknowns(k);
    let ax = 0;
    let qaa = 0;
    for (let s = 0; s < m; s++) {
      ax += coef[s] * dx[idx[s]];
      for (let t = 0; t < m; t++) qaa += coef[s] * coef[t] * inverseEntry(z, idx[s], idx[t]);
    }
    v[k] = ax - l0[k];
    r[k] = 1 - weight[k] * qaa;
    vtpv += weight[k] * v[k] * v[k];
  }
  const pv = new Float64Array(nPseudo);
  const pr = new Float64Array(nPseudo);
  weightedIdx.forEach((i, s) => {
    const u = unknownOfPoint[i];
    pv[s] = dx[u] - pseudoL0[s];
    pr[s] = 1 - pseudoWeight[s] * inverseEntry(z, u, u);
    vtpv += pseudoWeight[s] * pv[s] * pv[s];
  });

  const dof = nObs + nPseudo - nUnknowns;
  const sigma0 = dof > 0 ? Math.sqrt(vtpv / dof) : null;
  let globalTest: GlobalTest | null = null;
  if (dof > 0) {
    const lower = chiSquareQuantile(alpha / 2, dof);
    const upper = chiSquareQuantile(1 - alpha / 2, dof);
    globalTest = { statistic: vtpv, degreesOfFreedom: dof, alpha, lower, upper, critical: upper, passed: vtpv >= lower && vtpv <= upper };
  }
  const kCrit = normalQuantile(1 - alpha0 / 2);

  const analyse = (residual: number, sigma: number, redundancy: number): ResidualAnalysis => {
    const rr = redundancy < REDUNDANCY_FLOOR ? 0 : Math.min(redundancy, 1);
    const sigmaResidual = sigma * Math.sqrt(rr);
    const w = rr > 0 ? residual / sigmaResidual : null;
    return { residual, sigmaResidual, redundancy: rr, standardizedResidual: w, suspected: w !== null && Math.abs(w) > kCrit };
  };

  const outPoints: AdjustedPoint[] = points.map((pt, i) => {
    const u = unknownOfPoint[i];
    const c = u >= 0 ? c0[i] + dx[u] : c0[i];
    const sigma = u >= 0 ? Math.sqrt(Math.max(inverseEntry(z, u, u), 0)) : 0;
    const res: AdjustedPoint = {
      code: pt.code,
      c,
      sigma,
      sigmaScaled: sigma0 === null ? null : sigma * sigma0,
      datum: role[i] === HELD ? 'held' : role[i] === WEIGHTED ? 'weighted' : 'free',
    };
    if (pt.fixedC !== undefined) res.knownC = pt.fixedC;
    return res;
  });

  const outObs: AdjustedObservation[] = observations.map((ob, k) => {
    const a = analyse(v[k], ob.sigma, r[k]);
    const res: AdjustedObservation = {
      index: k,
      from: ob.from,
      to: ob.to,
      kind: ob.kind ?? 'levelling',
      deltaC: ob.deltaC,
      ...a,
      sigmaAdjusted: ob.sigma * Math.sqrt(Math.max(1 - a.redundancy, 0)),
    };
    if (ob.id !== undefined) res.id = ob.id;
    return res;
  });

  const outFixed: FixedPointObservation[] = weightedIdx.map((i, s) => ({
    code: points[i].code,
    fixedC: points[i].fixedC as number,
    sigmaFixed: points[i].sigmaFixed as number,
    ...analyse(pv[s], points[i].sigmaFixed as number, pr[s]),
  }));

  const outOffsets: AdjustedDatumOffset[] = offsetNames.map((name, k) => {
    const u = firstOffsetUnknown + k;
    const sigma = Math.sqrt(Math.max(inverseEntry(z, u, u), 0));
    return { name, value: dx[u], sigma, sigmaScaled: sigma0 === null ? null : sigma * sigma0 };
  });

  const suspects: SuspectedObservation[] = [];
  outObs.forEach((o, k) => {
    if (o.suspected) {
      const s: SuspectedObservation = { source: 'observation', index: k, from: o.from, to: o.to, standardizedResidual: o.standardizedResidual as number };
      if (o.id !== undefined) s.id = o.id;
      suspects.push(s);
    }
  });
  outFixed.forEach((o, k) => {
    if (o.suspected) suspects.push({ source: 'fixedPoint', index: k, code: o.code, standardizedResidual: o.standardizedResidual as number });
  });
  suspects.sort((a, b) => Math.abs(b.standardizedResidual) - Math.abs(a.standardizedResidual));

  progress(1, 'statistical tests');
  const result: AdjustmentResult = {
    constraint,
    points: outPoints,
    observations: outObs,
    fixedPointObservations: outFixed,
    datumOffsets: outOffsets,
    unknowns: nUnknowns,
    degreesOfFreedom: dof,
    vtpv,
    sigma0,
    globalTest,
    snooping: { alpha0, criticalValue: kCrit, suspects },
    factorNonZeros: factor.colPtr[factor.n],
  };
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
