// Frequency-stability statistics after NIST SP 1065 (Riley 2008, §5.2) and IEEE Std 1139-2008: overlapping and
// non-overlapping Allan deviation, modified Allan deviation and time deviation, with confidence intervals from the
// SP 1065 §5.3 simple EDF approximations (Howe, Allan & Barnes 1981) and lag-1 autocorrelation noise identification
// (Riley & Greenhall 2004, SP 1065 §5.6).
//
// Method, for speed (O(N) per averaging factor m) and for honest gaps:
// - Work from fractional frequency y (phase input is differenced first). The mean of y is removed, which leaves every
//   statistic unchanged (second differences cancel a linear phase) and keeps the cumulative sums small.
// - Phase is x_k = τ0·S_k with S the prefix sum of y. A second difference x_{i+2m} − 2x_{i+m} + x_i only involves the y
//   samples i … i+2m−1, so it is defined exactly when all of them are valid. Invalid rows and missing epochs are gaps:
//   every term whose window touches a gap is skipped (never joined across the gap); the variance is the mean of the
//   remaining terms. MDEV inner sums come from prefix sums of the second differences and need y valid on j … j+3m−2.

import { chiSquareQuantile } from './distributions';
import { expectedModRatio, greenhallEdf, type PowerLawAlpha } from './edf';
import { ScienceInputError } from './errors';

export type NoiseType = 'WPM' | 'FPM' | 'WFM' | 'FFM' | 'RWFM';

const NOISE_BY_ALPHA: Record<number, NoiseType> = { 2: 'WPM', 1: 'FPM', 0: 'WFM', [-1]: 'FFM', [-2]: 'RWFM' };
export const ALPHA_OF_NOISE: Readonly<Record<NoiseType, PowerLawAlpha>> = { WPM: 2, FPM: 1, WFM: 0, FFM: -1, RWFM: -2 };
/** Riley & Greenhall: the lag-1 ACF estimate needs about this many averaged points. */
const MIN_POINTS_FOR_NOISE_ID = 30;
/** Fewest averages for the B1 ratio; below this the noise type is carried over from the shorter τ. */
const MIN_POINTS_FOR_B1 = 8;

/** How the noise type at a τ was found: lag-1 ACF, B1 ratio (with R(n) for the phase noises), or carried from a shorter τ. */
export type NoiseMethod = 'acf' | 'b1' | 'carried';

export interface StabilityPoint {
  tauSeconds: number;
  m: number;
  /** Number of overlapping ADEV terms used (gaps excluded). */
  n: number;
  /** Overlapping Allan deviation. */
  adev: number | null;
  adevLow: number | null;
  adevHigh: number | null;
  adevNonOverlapping: number | null;
  nNonOverlapping: number;
  mdev: number | null;
  nMdev: number;
  /** Time deviation in seconds: τ/√3 · MDEV. */
  tdev: number | null;
  /** Equivalent degrees of freedom of the OADEV estimate (Greenhall & Riley 2003, for the noise found at this τ). */
  edf: number | null;
  /** Confidence interval of MDEV (and, scaled by τ/√3, of TDEV) from the modified-variance EDF. */
  mdevLow: number | null;
  mdevHigh: number | null;
  edfMdev: number | null;
  tdevLow: number | null;
  tdevHigh: number | null;
  /** Overlapping Hadamard deviation (SP 1065 §5.2.8), insensitive to a linear frequency drift. */
  hdev: number | null;
  hdevLow: number | null;
  hdevHigh: number | null;
  nHdev: number;
  edfHdev: number | null;
  /** Total deviation (SP 1065 §5.2.11, reflected at both ends); null for records with gaps. */
  totdev: number | null;
  totdevLow: number | null;
  totdevHigh: number | null;
  edfTotdev: number | null;
  noiseType: NoiseType;
  /** False when too few averaged points remained and the noise type was carried over from a shorter τ (or WFM assumed). */
  noiseIdentified: boolean;
  noiseMethod: NoiseMethod;
  /** Averages of length m that enter the noise identification (finite blocks). */
  noiseBlocks: number;
}

export interface StabilityInput {
  /** Fractional frequency samples, one per τ0. Give either y or x. */
  y?: Float64Array;
  /** Phase (time error) samples in seconds, one per τ0; NaN marks a missing point. */
  x?: Float64Array;
  tau0Seconds: number;
  /** 1 = usable, 0 = gap; same length as y (or x). */
  valid?: Uint8Array;
  /** Averaging factors; octave m = 1, 2, 4 … (while 3m ≤ N) by default. */
  ms?: number[];
  /** Two-sided confidence level of the ADEV interval; 0.683 (±1σ, SP 1065 usage) by default. */
  confidence?: number;
}

export interface PreparedFrequency {
  n: number;
  /** Mean of the valid y samples (removed before the sums). */
  meanY: number;
  /** Prefix sums of mean-removed y, gaps counted as 0 (never used across a gap). */
  prefix: Float64Array;
  /** Prefix count of invalid samples: window [a, b) is clean iff bad[b] === bad[a]. */
  bad: Int32Array;
  invalidCount: number;
}

/** x_{k+1} = x_k + y_k·τ0 (SP 1065 §3.4). An invalid y makes the next phase point NaN; the segment after the gap continues from the last finite value, i.e. with an arbitrary offset. */
export function frequencyToPhase(y: Float64Array, tau0Seconds: number, valid?: Uint8Array): Float64Array {
  const x = new Float64Array(y.length + 1);
  let last = 0;
  for (let i = 0; i < y.length; i++) {
    const ok = (valid ? valid[i] === 1 : true) && Number.isFinite(y[i]);
    if (ok) {
      last += y[i] * tau0Seconds;
      x[i + 1] = last;
    } else {
      x[i + 1] = NaN;
    }
  }
  return x;
}

/** y_i = (x_{i+1} − x_i)/τ0; a sample touching a missing (NaN or invalid) phase point is flagged invalid. */
export function phaseToFrequency(x: Float64Array, tau0Seconds: number, valid?: Uint8Array): { y: Float64Array; valid: Uint8Array } {
  const n = Math.max(x.length - 1, 0);
  const y = new Float64Array(n);
  const ok = new Uint8Array(n);
  for (let i = 0; i < n; i++) {
    const good = Number.isFinite(x[i]) && Number.isFinite(x[i + 1]) && (valid ? valid[i] === 1 && valid[i + 1] === 1 : true);
    y[i] = good ? (x[i + 1] - x[i]) / tau0Seconds : NaN;
    ok[i] = good ? 1 : 0;
  }
  return { y, valid: ok };
}

export function prepareFrequency(y: Float64Array, valid?: Uint8Array): PreparedFrequency {
  const n = y.length;
  if (valid && valid.length !== n) throw new ScienceInputError('valid', 'must have the same length as y');
  let sum = 0;
  let count = 0;
  const bad = new Int32Array(n + 1);
  for (let i = 0; i < n; i++) {
    const ok = (valid ? valid[i] === 1 : true) && Number.isFinite(y[i]);
    bad[i + 1] = bad[i] + (ok ? 0 : 1);
    if (ok) {
      sum += y[i];
      count++;
    }
  }
  const meanY = count > 0 ? sum / count : 0;
  const prefix = new Float64Array(n + 1);
  for (let i = 0; i < n; i++) {
    prefix[i + 1] = prefix[i] + (bad[i + 1] === bad[i] ? y[i] - meanY : 0);
  }
  return { n, meanY, prefix, bad, invalidCount: n - count };
}

interface RawDeviations {
  oavar: number;
  nOverlapping: number;
  /** Σ d_i² of the overlapping second differences (the interior of the total variance's sum). */
  sumOverlapping: number;
  avar: number;
  nNonOverlapping: number;
  mvar: number;
  nMod: number;
  ohvar: number;
  nHad: number;
}

/** Maximal runs of valid samples as [start, end) pairs of y indices: a window is clean iff it lies inside one run. */
function validRuns(p: PreparedFrequency): Int32Array {
  const { n, bad } = p;
  const runs: number[] = [];
  let start = -1;
  for (let k = 0; k < n; k++) {
    const ok = bad[k + 1] === bad[k];
    if (ok && start < 0) start = k;
    else if (!ok && start >= 0) {
      runs.push(start, k);
      start = -1;
    }
  }
  if (start >= 0) runs.push(start, n);
  return Int32Array.from(runs);
}

function deviationsForM(p: PreparedFrequency, m: number, scratch: Float64Array, runs: Int32Array): RawDeviations {
  const { n, prefix: s, bad } = p;
  const lastI = n - 2 * m;
  let sumO = 0;
  let cntO = 0;
  let sumA = 0;
  let cntA = 0;
  let sumM = 0;
  let cntM = 0;
  let sumH = 0;
  let cntH = 0;
  // One sweep per run of valid samples for OADEV, MDEV and HDEV; a term whose window lies in one run is used, any
  // other is not (the same rule as bad[end] === bad[start], without looking it up per term):
  // d_i = x_{i+2m} − 2x_{i+m} + x_i (window y_i … y_{i+2m−1}); scratch holds prefix sums of d within the run for the
  // MDEV inner sums over d_j … d_{j+m−1} (j = i + 1 − m, window y_j … y_{j+3m−2}); third differences
  // x_{i+3m} − 3x_{i+2m} + 3x_{i+m} − x_i span y_i … y_{i+3m−1}.
  const twoM = 2 * m;
  const threeM = 3 * m;
  for (let r = 0; r < runs.length; r += 2) {
    const a = runs[r];
    const b = runs[r + 1];
    const lastO = b - twoM;
    if (lastO < a) continue;
    const lastH = b - threeM;
    const firstM = a + m - 1;
    scratch[a] = 0;
    for (let i = a; i <= lastO; i++) {
      const si = s[i];
      const sm = s[i + m];
      const s2m = s[i + twoM];
      const d = s2m - 2 * sm + si;
      const acc = scratch[i] + d;
      scratch[i + 1] = acc;
      sumO += d * d;
      if (i >= firstM) {
        const inner = acc - scratch[i + 1 - m];
        sumM += inner * inner;
      }
      if (i <= lastH) {
        const h = s[i + threeM] - 3 * s2m + 3 * sm - si;
        sumH += h * h;
      }
    }
    cntO += lastO - a + 1;
    cntM += Math.max(0, lastO - firstM + 1);
    cntH += Math.max(0, lastH - a + 1);
  }
  for (let i = 0; i <= lastI; i += m) {
    if (bad[i + twoM] === bad[i]) {
      const d = s[i + twoM] - 2 * s[i + m] + s[i];
      sumA += d * d;
      cntA++;
    }
  }
  const m2 = m * m;
  return {
    ohvar: cntH > 0 ? sumH / (6 * m2 * cntH) : NaN,
    nHad: cntH,
    oavar: cntO > 0 ? sumO / (2 * m2 * cntO) : NaN,
    nOverlapping: cntO,
    sumOverlapping: sumO,
    avar: cntA > 0 ? sumA / (2 * m2 * cntA) : NaN,
    nNonOverlapping: cntA,
    mvar: cntM > 0 ? sumM / (2 * m2 * m2 * cntM) : NaN,
    nMod: cntM,
  };
}

/** r1 of z[0 … len−1] around `mean`: Σ of products of adjacent finite deviations over Σ of squared finite deviations. */
function lag1Autocorrelation(z: Float64Array, len: number, mean: number): { r1: number; pairs: number } {
  // Gaps are NaN; block means of finite data are never infinite, so `v === v` is the gap test.
  let num = 0;
  let den = 0;
  let pairs = 0;
  let previous = NaN;
  for (let i = 0; i < len; i++) {
    const a = z[i] - mean;
    if (a !== a) {
      previous = NaN;
      continue;
    }
    den += a * a;
    if (previous === previous) {
      num += previous * a;
      pairs++;
    }
    previous = a;
  }
  return { r1: den > 0 ? num / den : 0, pairs };
}

/**
 * Power-law noise type at averaging factor m from frequency data (Riley & Greenhall 2004; SP 1065 §5.6):
 * average y over m, difference until δ = r1/(1+r1) < 0.25 (at most twice), α = −round(2δ) − 2d.
 * Gapped blocks are NaN and the ACF uses only pairs of adjacent finite values. Returns null with too few points.
 */
export function identifyNoiseType(p: PreparedFrequency, m: number): NoiseType | null {
  return identifyNoiseAcf(p, m)?.noise ?? null;
}

/** Distance of 2δ from the nearest whole number above which the ACF call is taken as inconclusive (0.5 = a coin toss). */
const ACF_INCONCLUSIVE_MARGIN = 0.3;

/**
 * The lag-1 ACF identification with a flag for a conclusive call: 2δ within ±0.3 of a whole number; also δ and the
 * number d of differences taken. `scratch` (at least ⌊n/m⌋ long, contents overwritten) holds the averages and their
 * differences in place, so a caller looping over m allocates nothing per factor; without it one array is allocated.
 */
export function identifyNoiseAcf(p: PreparedFrequency, m: number, scratch?: Float64Array): { noise: NoiseType; conclusive: boolean; delta: number; differences: number } | null {
  const blocks = Math.floor(p.n / m);
  if (blocks < MIN_POINTS_FOR_NOISE_ID) return null;
  const z = scratch && scratch.length >= blocks ? scratch : new Float64Array(blocks);
  const { prefix, bad } = p;
  // the m-averages and the sum of the finite ones in one pass
  let sum = 0;
  let cnt = 0;
  for (let k = 0, a = 0; k < blocks; k++, a += m) {
    const b = a + m;
    const v = bad[b] === bad[a] ? (prefix[b] - prefix[a]) / m : NaN;
    z[k] = v;
    if (v === v) {
      sum += v;
      cnt++;
    }
  }
  let len = blocks;
  for (let d = 0; d <= 2; d++) {
    const { r1, pairs } = lag1Autocorrelation(z, len, sum / cnt);
    if (pairs < MIN_POINTS_FOR_NOISE_ID - 1) return null;
    const delta = r1 / (1 + r1);
    if (delta < 0.25 || d === 2) {
      const alpha = Math.max(-2, Math.min(2, -Math.round(2 * delta) - 2 * d));
      return { noise: NOISE_BY_ALPHA[alpha], conclusive: Math.abs(2 * delta - Math.round(2 * delta)) <= ACF_INCONCLUSIVE_MARGIN, delta, differences: d };
    }
    // first differences in place (z[i] is read before it is overwritten), with the sum of the finite ones
    len--;
    sum = 0;
    cnt = 0;
    for (let i = 0; i < len; i++) {
      const v = z[i + 1] - z[i];
      z[i] = v;
      if (v === v) {
        sum += v;
        cnt++;
      }
    }
  }
  return null;
}

/**
 * Equivalent degrees of freedom of the overlapping Allan variance: the simple approximations of NIST SP 1065 §5.3
 * (Table 5; Howe, Allan & Barnes 1981 — formula layout from memory), with N the number of phase points and m the
 * averaging factor. Kept as the cross-check of the Greenhall–Riley EDF that the analysis uses.
 */
export function oadevEdf(noise: NoiseType, phasePoints: number, m: number): number {
  const N = phasePoints;
  switch (noise) {
    case 'WPM':
      return ((N + 1) * (N - 2 * m)) / (2 * (N - m));
    case 'FPM':
      return Math.exp(Math.sqrt(Math.log((N - 1) / (2 * m)) * Math.log(((2 * m + 1) * (N - 1)) / 4)));
    case 'WFM':
      return ((3 * (N - 1)) / (2 * m) - (2 * (N - 2)) / N) * ((4 * m * m) / (4 * m * m + 5));
    case 'FFM':
      return m === 1 ? (2 * (N - 2) ** 2) / (2.3 * N - 4.9) : (5 * N * N) / (4 * m * (N + 3 * m));
    case 'RWFM':
      return (((N - 2) / m) * ((N - 1) ** 2 - 3 * m * (N - 1) + 4 * m * m)) / (N - 3) ** 2;
  }
}

/**
 * B1 bias function, the expected ratio of the N-sample variance to the Allan variance of N averages for
 * σ²_y(τ) ∝ τ^μ (Barnes 1969; SP 1065 §5.6): B1(N, μ) = N(1 − N^μ) / (2(N − 1)(1 − 2^μ)), and its limit at μ = 0.
 */
export function b1Ratio(N: number, mu: number): number {
  if (mu === 0) return (N * Math.log(N)) / (2 * (N - 1) * Math.LN2);
  return (N * (1 - N ** mu)) / (2 * (N - 1) * (1 - 2 ** mu));
}

const NOISE_BY_MU: ReadonlyArray<readonly [number, NoiseType]> = [[-2, 'WPM'], [-1, 'WFM'], [0, 'FFM'], [1, 'RWFM']];

/**
 * Noise type from the B1 ratio of the m-averages (SP 1065 §5.6), for the long-τ end where the lag-1 ACF has too few
 * points: the observed B1 is compared with B1(N, μ) for μ = −2 (phase noise), −1 (WFM), 0 (FFM), 1 (RWFM) on a log scale.
 * For μ = −2, R(n) = Mod σ²/σ² tells white from flicker PM (expected values from the Greenhall–Riley autocovariance).
 */
export function identifyNoiseB1(p: PreparedFrequency, m: number, modOverAllan: number): { noise: NoiseType; blocks: number } | null {
  const blocks = Math.floor(p.n / m);
  const z: number[] = [];
  let sumSq = 0;
  let pairs = 0;
  let previous = NaN;
  for (let k = 0; k < blocks; k++) {
    const a = k * m;
    const b = a + m;
    const v = p.bad[b] === p.bad[a] ? (p.prefix[b] - p.prefix[a]) / m : NaN;
    if (v === v) {
      z.push(v);
      if (previous === previous) {
        sumSq += (v - previous) ** 2;
        pairs++;
      }
    }
    previous = v;
  }
  const N = z.length;
  if (N < MIN_POINTS_FOR_B1 || pairs < MIN_POINTS_FOR_B1 - 1) return null;
  const mean = z.reduce((acc, v) => acc + v, 0) / N;
  const variance = z.reduce((acc, v) => acc + (v - mean) ** 2, 0) / (N - 1);
  const allan = sumSq / (2 * pairs);
  if (!(allan > 0)) return null;
  const observed = variance / allan;
  let best: NoiseType = 'WFM';
  let bestDistance = Infinity;
  for (const [mu, noise] of NOISE_BY_MU) {
    const distance = Math.abs(Math.log(observed / b1Ratio(N, mu)));
    if (distance < bestDistance) {
      bestDistance = distance;
      best = noise;
    }
  }
  if (best === 'WPM' && m > 1 && Number.isFinite(modOverAllan) && modOverAllan > 0) {
    const white = expectedModRatio(2, m);
    const flicker = expectedModRatio(1, m);
    best = Math.abs(Math.log(modOverAllan / white)) <= Math.abs(Math.log(modOverAllan / flicker)) ? 'WPM' : 'FPM';
  }
  return { noise: best, blocks: N };
}

/**
 * Total variance (SP 1065 §5.2.11): the phase record is extended by reflection about both end points,
 * x*_{1−j} = 2x_1 − x_{1+j}, x*_{N+j} = 2x_N − x_{N−j}, and Totvar(τ) = Σ_{i=2}^{N−1} (x*_{i−m} − 2x*_i + x*_{i+m})² / (2τ²(N − 2)).
 * Defined here for records without gaps and m ≤ (N − 1)/2 phase steps.
 */
function totalVariance(p: PreparedFrequency, m: number, overlappingSum: number): number {
  if (p.invalidCount > 0) return NaN;
  const x = p.prefix; // phase in units of τ0, N = n + 1 points x_0 … x_n
  const N = p.n + 1;
  if (2 * m > N - 1) return NaN;
  // For m ≤ i ≤ N − 1 − m the term is the overlapping second difference d_{i−m}, so the interior is the OADEV sum
  // of the same record (no gaps here); only the 2(m − 1) terms that reach into the reflections are added.
  let sum = overlappingSum;
  for (let i = 1; i < m; i++) {
    const d = 2 * x[0] - x[m - i] - 2 * x[i] + x[i + m];
    sum += d * d;
  }
  for (let i = Math.max(N - m, m); i <= N - 2; i++) {
    const d = x[i - m] - 2 * x[i] + 2 * x[N - 1] - x[2 * (N - 1) - i - m];
    sum += d * d;
  }
  return sum / (2 * m * m * (N - 2));
}

/** SP 1065 §5.3 Table 7 (from memory): EDF of the total variance ≈ b·(T/τ) − c for WFM, FFM and RWFM. */
const TOTVAR_EDF: Partial<Record<NoiseType, readonly [number, number]>> = { WFM: [1.5, 0], FFM: [1.17, 0.22], RWFM: [0.93, 0.36] };

/** Octave averaging factors 1, 2, 4, … while MDEV is still defined (3m ≤ N). */
export function octaveFactors(sampleCount: number): number[] {
  const ms: number[] = [];
  for (let m = 1; 3 * m <= sampleCount; m *= 2) ms.push(m);
  return ms;
}

function frequencyInput(input: StabilityInput): { y: Float64Array; valid?: Uint8Array } {
  if (input.y && input.x) throw new ScienceInputError('x', 'give either y or x, not both');
  if (input.y) return { y: input.y, valid: input.valid };
  if (input.x) return phaseToFrequency(input.x, input.tau0Seconds, input.valid);
  throw new ScienceInputError('y', 'frequency (y) or phase (x) data are required');
}

function finiteOrNull(v: number): number | null {
  return Number.isFinite(v) ? v : null;
}

/** χ² interval of a deviation with `edf` degrees of freedom at two-sided confidence `confidence` (SP 1065 §5.3). */
function chiSquareInterval(deviation: number, edf: number, confidence: number): [number, number] {
  if (!(edf > 0) || !Number.isFinite(deviation)) return [NaN, NaN];
  return [
    deviation * Math.sqrt(edf / chiSquareQuantile((1 + confidence) / 2, edf)),
    deviation * Math.sqrt(edf / chiSquareQuantile((1 - confidence) / 2, edf)),
  ];
}

/** Greenhall–Riley EDF, or NaN where the variance is not defined for this noise (e.g. MVAR needs α > −3). */
function edfOf(noise: NoiseType, m: number, phasePoints: number, d: 2 | 3, modified: boolean): number {
  const edf = greenhallEdf(ALPHA_OF_NOISE[noise], m, phasePoints, { d, overlapping: true, modified });
  return edf > 0 ? edf : NaN;
}

export function stabilityAnalysis(input: StabilityInput): StabilityPoint[] {
  const tau0 = input.tau0Seconds;
  if (!(tau0 > 0) || !Number.isFinite(tau0)) throw new ScienceInputError('tau0Seconds', 'must be a finite positive number');
  const confidence = input.confidence ?? 0.683;
  if (!(confidence > 0 && confidence < 1)) throw new ScienceInputError('confidence', 'must lie strictly between 0 and 1');
  const { y, valid } = frequencyInput(input);
  const prepared = prepareFrequency(y, valid);
  const ms = input.ms ?? octaveFactors(prepared.n);
  ms.forEach((m, i) => {
    if (!Number.isInteger(m) || m < 1) throw new ScienceInputError(`ms[${i}]`, 'averaging factors must be positive integers');
  });
  const scratch = new Float64Array(prepared.n + 1);
  const runs = validRuns(prepared);
  const points: StabilityPoint[] = [];
  let carried: NoiseType = 'WFM';
  for (const m of [...ms].sort((a, b) => a - b)) {
    if (2 * m > prepared.n) continue;
    const raw = deviationsForM(prepared, m, scratch, runs);
    const tauSeconds = m * tau0;
    let noiseType: NoiseType = carried;
    let noiseMethod: NoiseMethod = 'carried';
    let noiseBlocks = Math.floor(prepared.n / m);
    const byAcf = identifyNoiseAcf(prepared, m, scratch);
    const byB1 = byAcf?.conclusive ? null : identifyNoiseB1(prepared, m, raw.mvar / raw.oavar);
    if (byAcf && (byAcf.conclusive || !byB1)) {
      noiseType = byAcf.noise;
      noiseMethod = 'acf';
    } else if (byB1) {
      noiseType = byB1.noise;
      noiseMethod = 'b1';
      noiseBlocks = byB1.blocks;
    }
    carried = noiseType;
    const adev = Math.sqrt(raw.oavar);
    const mdev = Math.sqrt(raw.mvar);
    const hdev = Math.sqrt(raw.ohvar);
    // Gapped records: N is the phase count of an unbroken record with as many terms.
    const edf = raw.nOverlapping > 0 ? edfOf(noiseType, m, raw.nOverlapping + 2 * m, 2, false) : NaN;
    const edfMdev = raw.nMod > 0 ? edfOf(noiseType, m, raw.nMod + 3 * m - 1, 2, true) : NaN;
    const edfHdev = raw.nHad > 0 ? edfOf(noiseType, m, raw.nHad + 3 * m, 3, false) : NaN;
    const [adevLow, adevHigh] = chiSquareInterval(adev, edf, confidence);
    const [mdevLow, mdevHigh] = chiSquareInterval(mdev, edfMdev, confidence);
    const [hdevLow, hdevHigh] = chiSquareInterval(hdev, edfHdev, confidence);
    const totdev = Math.sqrt(totalVariance(prepared, m, raw.sumOverlapping));
    const tot = TOTVAR_EDF[noiseType];
    const edfTotdev = Number.isFinite(totdev) ? (tot ? tot[0] * (prepared.n / m) - tot[1] : edf) : NaN;
    const [totdevLow, totdevHigh] = chiSquareInterval(totdev, edfTotdev, confidence);
    const tdevScale = tauSeconds / Math.sqrt(3);
    points.push({
      tauSeconds,
      m,
      n: raw.nOverlapping,
      adev: finiteOrNull(adev),
      adevLow: finiteOrNull(adevLow),
      adevHigh: finiteOrNull(adevHigh),
      adevNonOverlapping: finiteOrNull(Math.sqrt(raw.avar)),
      nNonOverlapping: raw.nNonOverlapping,
      mdev: finiteOrNull(mdev),
      nMdev: raw.nMod,
      tdev: finiteOrNull(tdevScale * mdev),
      edf: finiteOrNull(edf),
      mdevLow: finiteOrNull(mdevLow),
      mdevHigh: finiteOrNull(mdevHigh),
      edfMdev: finiteOrNull(edfMdev),
      tdevLow: finiteOrNull(tdevScale * mdevLow),
      tdevHigh: finiteOrNull(tdevScale * mdevHigh),
      hdev: finiteOrNull(hdev),
      hdevLow: finiteOrNull(hdevLow),
      hdevHigh: finiteOrNull(hdevHigh),
      nHdev: raw.nHad,
      edfHdev: finiteOrNull(edfHdev),
      totdev: finiteOrNull(totdev),
      totdevLow: finiteOrNull(totdevLow),
      totdevHigh: finiteOrNull(totdevHigh),
      edfTotdev: finiteOrNull(edfTotdev),
      noiseType,
      noiseIdentified: noiseMethod !== 'carried',
      noiseMethod,
      noiseBlocks,
    });
  }
  return points;
}

export interface RegularGrid {
  y: Float64Array;
  valid: Uint8Array;
  tau0Seconds: number;
  startMjd: number;
  /** Grid slots with no sample at all (dead time). */
  missingEpochs: number;
  /** Samples present but flagged invalid. */
  invalidSamples: number;
}

const MAX_GRID_POINTS = 100_000_000;

/**
 * The k-th smallest value (0-based) of `a`, which is reordered: quickselect with a three-way partition, so runs of
 * equal values (regular epoch spacings) cost one pass each; linear time on average (Hoare 1961, "Algorithm 65: Find",
 * CACM 4(7):321; three-way partitioning after Dijkstra's Dutch national flag — from memory). Same value as
 * `a.sort()[k]`. NaN is not expected (spacings of finite epochs).
 */
export function kthSmallest(a: Float64Array, k: number): number {
  if (!(k >= 0 && k < a.length)) throw new RangeError(`k = ${k} outside 0 … ${a.length - 1}`);
  let lo = 0;
  let hi = a.length - 1;
  let seed = 0x9e3779b9;
  while (lo < hi) {
    // A pseudo-random pivot (xorshift), so sorted or adversarial orders do not degrade to quadratic time.
    seed ^= seed << 13;
    seed ^= seed >>> 17;
    seed ^= seed << 5;
    const pivot = a[lo + ((seed >>> 0) % (hi - lo + 1))];
    let lt = lo;
    let gt = hi;
    let i = lo;
    while (i <= gt) {
      const v = a[i];
      if (v < pivot) {
        a[i] = a[lt];
        a[lt] = v;
        lt++;
        i++;
      } else if (v > pivot) {
        a[i] = a[gt];
        a[gt] = v;
        gt--;
      } else i++;
    }
    // a[lo … lt−1] < pivot, a[lt … gt] = pivot, a[gt+1 … hi] > pivot
    if (k < lt) hi = lt - 1;
    else if (k > gt) lo = gt + 1;
    else return pivot;
  }
  return a[k];
}

/**
 * Places time-stamped samples on a regular τ0 grid so that dead time is explicit: each slot without a sample,
 * and each sample flagged invalid, becomes a gap (valid = 0). τ0 defaults to the median epoch spacing.
 * Epochs must ascend and sit within ±τ0/4 of a grid slot; two samples in one slot are refused.
 */
/**
 * The mean spacing carries the rounding of the MJD epochs (≈ 1e-8 relative), which would show as τ = 5119.99995 s.
 * Snap to the nearest microsecond when that changes τ0 by at most 1e-6 relative and moves the last epoch by less
 * than 1 % of a slot, so the grid assignment is unchanged.
 */
function snapTau0(tau0Seconds: number, spanSeconds: number): number {
  const snapped = Math.round(tau0Seconds * 1e6) / 1e6;
  if (!(snapped > 0) || Math.abs(snapped - tau0Seconds) > 1e-6 * tau0Seconds) return tau0Seconds;
  const driftSlots = Math.abs(spanSeconds / snapped - spanSeconds / tau0Seconds);
  return driftSlots < 0.01 ? snapped : tau0Seconds;
}

export function gridFromEpochs(epochsMjd: Float64Array, y: Float64Array, valid?: Uint8Array, tau0Seconds?: number): RegularGrid {
  const n = epochsMjd.length;
  if (y.length !== n) throw new ScienceInputError('y', 'must have the same length as epochsMjd');
  if (valid && valid.length !== n) throw new ScienceInputError('valid', 'must have the same length as epochsMjd');
  if (n === 0) return { y: new Float64Array(0), valid: new Uint8Array(0), tau0Seconds: tau0Seconds ?? 1, startMjd: NaN, missingEpochs: 0, invalidSamples: 0 };
  let tau0 = tau0Seconds;
  if (tau0 === undefined) {
    if (n < 2) throw new ScienceInputError('tau0Seconds', 'cannot be inferred from a single sample');
    const spacings = new Float64Array(n - 1);
    for (let i = 1; i < n; i++) spacings[i - 1] = (epochsMjd[i] - epochsMjd[i - 1]) * 86_400;
    const median = kthSmallest(spacings, Math.floor((n - 1) / 2));
    // Epochs in files are rounded (MJD to 1e-9 d ≈ 86 µs), so one spacing is biased and the bias grows with the slot
    // index; the mean of the near-regular spacings telescopes to the span of each run and is unbiased.
    let sum = 0;
    let count = 0;
    for (let i = 1; i < n; i++) {
      const d = (epochsMjd[i] - epochsMjd[i - 1]) * 86_400;
      if (Math.abs(d - median) <= 0.25 * median) {
        sum += d;
        count++;
      }
    }
    tau0 = snapTau0(count > 0 ? sum / count : median, (epochsMjd[n - 1] - epochsMjd[0]) * 86_400);
  }
  if (!(tau0 > 0)) throw new ScienceInputError('tau0Seconds', 'must be positive (are there repeated epochs?)');
  const startMjd = epochsMjd[0];
  const slotsOf = (mjd: number): number => ((mjd - startMjd) * 86_400) / tau0!;
  const length = Math.round(slotsOf(epochsMjd[n - 1])) + 1;
  if (length > MAX_GRID_POINTS) throw new ScienceInputError('epochsMjd', `span needs more than ${MAX_GRID_POINTS} grid points at this τ0`);
  const gy = new Float64Array(length).fill(NaN);
  const gv = new Uint8Array(length);
  let previous = -1;
  let invalidSamples = 0;
  for (let i = 0; i < n; i++) {
    const exact = slotsOf(epochsMjd[i]);
    const slot = Math.round(exact);
    if (Math.abs(exact - slot) > 0.25) throw new ScienceInputError(`epochsMjd[${i}]`, 'is more than τ0/4 away from the regular grid');
    if (slot <= previous) throw new ScienceInputError(`epochsMjd[${i}]`, 'epochs must ascend with at most one sample per τ0');
    previous = slot;
    const ok = (valid ? valid[i] === 1 : true) && Number.isFinite(y[i]);
    gy[slot] = y[i];
    gv[slot] = ok ? 1 : 0;
    if (!ok) invalidSamples++;
  }
  return { y: gy, valid: gv, tau0Seconds: tau0, startMjd, missingEpochs: length - n, invalidSamples };
}

/** How the statistical uncertainty of the mean was obtained. */
export type MeanUncertaintyModel = 'white-fm' | 'phase-noise' | 'flicker-fm-floor' | 'random-walk-fm' | 'none';

export interface MeanWithUncertainty {
  mean: number;
  statisticalUncertainty: number | null;
  /** Degrees of freedom of the statistical uncertainty (EDF of the deviation(s) it rests on); null without one. */
  degreesOfFreedom: number | null;
  validSamples: number;
  /** Time actually averaged: valid samples × τ0 (dead time excluded). */
  totalAveragingTimeSeconds: number;
  /** First to last valid sample, plus τ0. */
  spanSeconds: number;
  /** τ of the deviation that bounds the mean (the longest adequate τ), or of the longest white-FM point. */
  tauFitSeconds: number | null;
  model: MeanUncertaintyModel;
  /** White-FM level fitted over every τ identified as white FM: σ_y(τ) = whiteFmSigma1s·(τ/1 s)^−1/2. */
  whiteFm: { sigmaAt1s: number; tausSeconds: number[]; edf: number } | null;
  /** The deviation at the long-τ end when flicker or random-walk FM was found there. */
  floor: { noise: NoiseType; tauSeconds: number; deviation: number; deviationKind: 'OADEV' | 'TOTDEV'; edf: number } | null;
  method: string;
}

/** EDF a deviation needs to bound the mean ("adequate EDF"). */
const MIN_EDF_FOR_BOUND = 10;
/** A noise type counts as established when found from at least this many averages (the lag-1 ACF minimum). */
const MIN_BLOCKS_FOR_BOUND = MIN_POINTS_FOR_NOISE_ID;
/** One-sided level of the test for an excess over the white-FM fit at the long-τ end (a floor the type test missed). */
const EXCESS_TEST_LEVEL = 0.99;

/**
 * Var(ȳ) of flicker FM over a record started at rest, relative to its (flat) Allan variance: 1/ln 2. Derived from the
 * Kasdin & Walter (1992) discrete model, h_k ≈ k^−1/2/√π: Var(ȳ) → 2σ²/π and σ²_y(τ) = 2 ln 2·h₋₁ with h₋₁ = σ²/π
 * (our derivation, checked by the Monte Carlo coverage benchmark).
 */
export const FLICKER_FM_MEAN_FACTOR = 1 / Math.sqrt(Math.LN2);

function fmt(v: number): string {
  return String(Number(v.toPrecision(4)));
}

const ALPHA_ORDER = (n: NoiseType): number => ALPHA_OF_NOISE[n];

/**
 * Weighted least squares of σ²_y(τ) = a/τ + c/τ² (white FM plus a white/flicker PM part), weights EDF/model² (the variance of
 * an Allan-variance estimate is 2σ⁴/EDF, SP 1065 §5.3), two reweighting passes, c ≥ 0. a = σ²_y(1 s)·1 s.
 */
function fitWhiteFm(points: readonly StabilityPoint[]): { a: number; c: number } {
  let a = 0;
  let c = 0;
  const avar = points.map((p) => p.adev! ** 2);
  let model = avar.slice();
  for (let pass = 0; pass < 3; pass++) {
    let s11 = 0;
    let s12 = 0;
    let s22 = 0;
    let b1 = 0;
    let b2 = 0;
    let sa = 0;
    let sab = 0;
    points.forEach((p, i) => {
      const w = p.edf! / model[i] ** 2;
      const f1 = 1 / p.tauSeconds;
      const f2 = 1 / p.tauSeconds ** 2;
      s11 += w * f1 * f1;
      s12 += w * f1 * f2;
      s22 += w * f2 * f2;
      b1 += w * f1 * avar[i];
      b2 += w * f2 * avar[i];
      sa += w * f1 * f1;
      sab += w * f1 * avar[i];
    });
    const det = s11 * s22 - s12 * s12;
    a = sab / sa;
    c = 0;
    if (points.length >= 3 && det > 1e-12 * s11 * s22) {
      const a2 = (b1 * s22 - b2 * s12) / det;
      const c2 = (s11 * b2 - s12 * b1) / det;
      if (c2 > 0 && a2 > 0) {
        a = a2;
        c = c2;
      }
    }
    model = points.map((p) => a / p.tauSeconds + c / p.tauSeconds ** 2);
  }
  return { a, c };
}

/**
 * Mean of the valid y and its statistical uncertainty, for the noise actually found at each τ:
 * - white FM: σ²_y(τ) = a/τ (+ c/τ² for phase noise at short τ) is fitted over every τ identified as white or phase noise
 *   before the first flicker/random-walk FM (the dominant α only falls as τ grows), weights = EDF; u(ȳ) = √(a/T), T the
 *   valid averaging time (dead time excluded);
 * - a flicker-FM floor at the longest τ with adequate EDF (≥ 10, noise found from ≥ 30 averages) bounds u(ȳ) by
 *   σ_y(τ)/√ln 2, a random-walk FM by σ_y(τ)·√(T_span/τ) (σ²_y ∝ τ; Var(ȳ) = σ²_y(T) for a random walk started at rest).
 *   A floor is taken when flicker or random-walk FM was found at an adequate τ, or when σ²_y there exceeds the white-FM fit
 *   beyond the one-sided 99 % χ² limit. The deviation is TOTDEV where defined with more EDF, else OADEV (SP 1065 §5.2.11);
 * - phase noise to the long end (white FM never reached) is extrapolated as white FM, which overstates u(ȳ).
 * u(ȳ) is the largest applicable bound; its degrees of freedom are the EDF of the deviation(s) it rests on.
 */
export function meanWithStatisticalUncertainty(input: {
  y: Float64Array;
  tau0Seconds: number;
  valid?: Uint8Array;
  weights?: Float64Array;
  points?: StabilityPoint[];
}): MeanWithUncertainty {
  const { y, valid, weights, tau0Seconds } = input;
  if (weights && weights.length !== y.length) throw new ScienceInputError('weights', 'must have the same length as y');
  let sw = 0;
  let swy = 0;
  let count = 0;
  let first = -1;
  let last = -1;
  for (let i = 0; i < y.length; i++) {
    if ((valid && valid[i] !== 1) || !Number.isFinite(y[i])) continue;
    const w = weights ? weights[i] : 1;
    if (!(w >= 0)) throw new ScienceInputError(`weights[${i}]`, 'must be non-negative');
    sw += w;
    swy += w * y[i];
    count++;
    if (first < 0) first = i;
    last = i;
  }
  if (count === 0 || sw === 0) throw new ScienceInputError('y', 'no valid samples to average');
  const mean = swy / sw;
  const totalSeconds = count * tau0Seconds;
  const spanSeconds = (last - first + 1) * tau0Seconds;
  const base = { mean, validSamples: count, totalAveragingTimeSeconds: totalSeconds, spanSeconds };
  const points = input.points ?? stabilityAnalysis({ y, tau0Seconds, valid });
  const usable = points.filter((p) => p.adev !== null && p.adev > 0 && p.edf !== null);
  if (usable.length === 0) {
    return { ...base, statisticalUncertainty: null, degreesOfFreedom: null, tauFitSeconds: null, model: 'none', whiteFm: null, floor: null, method: 'too few samples for any Allan deviation; no statistical uncertainty' };
  }
  const established = (p: StabilityPoint): boolean => p.noiseIdentified && p.noiseBlocks >= MIN_BLOCKS_FOR_BOUND;

  // The white-FM region ends at the first τ where flicker or random-walk FM is established.
  const firstFloor = usable.findIndex((p) => established(p) && ALPHA_ORDER(p.noiseType) <= -1);
  const region = firstFloor < 0 ? usable : usable.slice(0, firstFloor);
  const whitePoints = region.filter((p) => p.noiseIdentified && p.noiseType === 'WFM');
  let whiteFm: MeanWithUncertainty['whiteFm'] = null;
  let phasePart = 0;
  if (whitePoints.length > 0) {
    const fitted = region.filter((p) => p.noiseIdentified && ALPHA_ORDER(p.noiseType) >= 0);
    const se = whitePoints.reduce((acc, p) => acc + p.edf!, 0);
    const edfMax = whitePoints.reduce((acc, p) => Math.max(acc, p.edf!), 0);
    // Octave estimates share the data: their EDF do not add up beyond what N samples hold.
    const fit = fitWhiteFm(fitted);
    phasePart = fit.c;
    whiteFm = { sigmaAt1s: Math.sqrt(fit.a), tausSeconds: whitePoints.map((p) => p.tauSeconds), edf: Math.min(se, Math.max(edfMax, count - 1)) };
  }

  const adequate = usable.filter((p) => p.edf! >= MIN_EDF_FOR_BOUND && established(p));
  const longest = adequate.length > 0 ? adequate[adequate.length - 1] : null;

  type Candidate = { u: number; edf: number; tau: number; model: MeanUncertaintyModel; text: string };
  const candidates: Candidate[] = [];
  if (whiteFm) {
    candidates.push({
      u: whiteFm.sigmaAt1s / Math.sqrt(totalSeconds), edf: whiteFm.edf, tau: whiteFm.tausSeconds[whiteFm.tausSeconds.length - 1], model: 'white-fm',
      text: `white FM fitted over τ = ${whiteFm.tausSeconds.map(fmt).join(', ')} s (EDF-weighted, EDF ${fmt(whiteFm.edf)}): u(ȳ) = σ_y(T) = ${fmt(whiteFm.sigmaAt1s)}·(T/1 s)^−1/2 at T = ${fmt(totalSeconds)} s`,
    });
  }
  let floor: MeanWithUncertainty['floor'] = null;
  if (longest) {
    const floorSeen = adequate.some((p) => ALPHA_ORDER(p.noiseType) <= -1);
    let excess = false;
    if (whiteFm) {
      // The test is under the white-FM hypothesis, so its EDF is white FM's (a mislabelled phase noise would overstate it).
      const predicted = whiteFm.sigmaAt1s ** 2 / longest.tauSeconds + phasePart / longest.tauSeconds ** 2;
      const edfWhite = edfOf('WFM', longest.m, longest.n + 2 * longest.m, 2, false);
      excess = edfWhite > 0 && longest.adev! ** 2 / predicted > chiSquareQuantile(EXCESS_TEST_LEVEL, edfWhite) / edfWhite;
    }
    if (floorSeen || excess) {
      // Random-walk FM needs its type at the longest τ and a rising ADEV from the τ before (slope > +1/4 on log–log axes).
      const previous = adequate.length > 1 ? adequate[adequate.length - 2] : null;
      const slope = previous ? Math.log(longest.adev! / previous.adev!) / Math.log(longest.tauSeconds / previous.tauSeconds) : 0;
      const randomWalk = longest.noiseType === 'RWFM' && slope > 0.25;
      // EDF for the floor's own noise model (flicker or random-walk FM), whatever type the single τ_L showed.
      const floorNoise: NoiseType = randomWalk ? 'RWFM' : 'FFM';
      const phasePoints = longest.n + 2 * longest.m;
      const edfAdev = edfOf(floorNoise, longest.m, phasePoints, 2, false);
      const tot = TOTVAR_EDF[floorNoise]!;
      const edfTot = longest.totdev !== null ? tot[0] * (phasePoints / longest.m) - tot[1] : NaN;
      const useTot = edfTot > edfAdev;
      const deviation = useTot ? longest.totdev! : longest.adev!;
      const edf = useTot ? edfTot : edfAdev;
      const kind = useTot ? 'TOTDEV' : 'OADEV';
      const at = `${kind}(${fmt(longest.tauSeconds)} s) = ${deviation.toExponential(3)} (EDF ${fmt(edf)} for ${floorNoise})`;
      const why = floorSeen ? 'flicker/random-walk FM found at an adequate τ' : 'σ²_y at the longest adequate τ exceeds the white-FM fit (one-sided 99 % χ²)';
      // The white-FM part of σ²_y(τ_L) averages down to T: only the excess over the fit is carried as the floor, and the
      // two parts combine with Welch–Satterthwaite (the excess has EDF·(excess/σ²)², the variance of σ² being 2σ⁴/EDF).
      // When the excess is under half of σ²_y(τ_L) its EDF would collapse; the whole σ²_y(τ_L) is then the bound.
      const whitePart = whiteFm ? whiteFm.sigmaAt1s ** 2 / longest.tauSeconds + phasePart / longest.tauSeconds ** 2 : 0;
      const variance = deviation * deviation;
      const subtract = whitePart > 0 && variance - whitePart >= 0.5 * variance;
      const excessVariance = subtract ? variance - whitePart : variance;
      const scale = randomWalk ? Math.max(spanSeconds / longest.tauSeconds, 1) : FLICKER_FM_MEAN_FACTOR ** 2;
      const uFloor2 = excessVariance * scale;
      const uWhite2 = subtract ? whiteFm!.sigmaAt1s ** 2 / totalSeconds : 0;
      const nuFloor = edf * (excessVariance / variance) ** 2;
      const u2 = uFloor2 + uWhite2;
      const denominator = (uFloor2 > 0 ? uFloor2 ** 2 / nuFloor : 0) + (uWhite2 > 0 ? uWhite2 ** 2 / whiteFm!.edf : 0);
      const nu = denominator > 0 ? (u2 * u2) / denominator : edf;
      const whiteText = subtract ? ` minus the fitted white-FM part, plus white FM at T (Welch–Satterthwaite ν = ${fmt(nu)})` : '';
      floor = { noise: floorNoise, tauSeconds: longest.tauSeconds, deviation, deviationKind: kind, edf };
      candidates.push(randomWalk
        ? {
          u: Math.sqrt(u2), edf: nu, tau: longest.tauSeconds, model: 'random-walk-fm',
          text: `random-walk FM at the longest adequate τ (${why}): u(ȳ)² = ${at}²·(T_span/τ)${whiteText}, T_span = ${fmt(spanSeconds)} s`,
        }
        : { u: Math.sqrt(u2), edf: nu, tau: longest.tauSeconds, model: 'flicker-fm-floor', text: `flicker-FM floor (${why}): u(ȳ)² = ${at}²/ln 2${whiteText}` });
    } else if (!whiteFm) {
      candidates.push({
        u: longest.adev! * Math.sqrt(longest.tauSeconds / totalSeconds), edf: longest.edf!, tau: longest.tauSeconds, model: 'phase-noise',
        text: `${longest.noiseType} up to the longest adequate τ, extrapolated as white FM (overstates u(ȳ) for phase noise): u(ȳ) = OADEV(${fmt(longest.tauSeconds)} s)·√(τ/T)`,
      });
    }
  }
  if (candidates.length === 0) {
    // No τ reached adequate EDF with an established noise type: the longest τ, extrapolated for its own noise type.
    const p = usable[usable.length - 1];
    const factor = p.noiseType === 'FFM' ? FLICKER_FM_MEAN_FACTOR : p.noiseType === 'RWFM' ? Math.sqrt(Math.max(spanSeconds / p.tauSeconds, 1)) : Math.sqrt(p.tauSeconds / totalSeconds);
    return {
      ...base, statisticalUncertainty: p.adev! * factor, degreesOfFreedom: p.edf, tauFitSeconds: p.tauSeconds,
      model: p.noiseType === 'FFM' ? 'flicker-fm-floor' : p.noiseType === 'RWFM' ? 'random-walk-fm' : p.noiseType === 'WFM' ? 'white-fm' : 'phase-noise',
      whiteFm, floor: null,
      method: `no τ reached EDF ≥ ${MIN_EDF_FOR_BOUND} with an established noise type: OADEV(${fmt(p.tauSeconds)} s) (${p.noiseType}, EDF ${fmt(p.edf!)}) extrapolated for that noise — weak`,
    };
  }
  const chosen = candidates.reduce((best, c) => (c.u > best.u ? c : best));
  const others = candidates.filter((c) => c !== chosen).map((c) => `${c.text} → ${c.u.toExponential(2)}`);
  return {
    ...base,
    statisticalUncertainty: chosen.u,
    degreesOfFreedom: chosen.edf,
    tauFitSeconds: chosen.tau,
    model: chosen.model,
    whiteFm,
    floor,
    method: `${chosen.text}${others.length ? `; the larger of this and ${others.join('; ')}` : ''}. Noise identified at each τ (lag-1 ACF; B1 and R(n) where it is inconclusive); EDF after Greenhall & Riley (2003).`,
  };
}

export interface LinearDrift {
  /** Fractional frequency drift per second. */
  slopePerSecond: number;
  /** Standard uncertainty of the slope for white FM residuals (least squares); an underestimate under flicker or random-walk FM. */
  slopeUncertaintyPerSecond: number;
  /** Mean epoch of the valid samples, seconds from the first grid slot: the mean ȳ refers to this epoch whether or not the drift is removed. */
  referenceEpochSeconds: number;
  /** y with the fitted drift removed about the reference epoch (gaps unchanged). */
  detrended: Float64Array;
}

/**
 * Linear frequency drift y = a + b·(t − t̄) by ordinary least squares over the valid samples (common practice;
 * SP 1065 §6 on drift removal). Removing it leaves the mean at t̄ unchanged and takes the τ¹ drift term out of ADEV.
 */
function leastSquaresDrift(y: Float64Array, valid?: Uint8Array): { bPerSample: number; uPerSample: number; tBar: number } {
  let n = 0;
  let st = 0;
  let sy = 0;
  for (let i = 0; i < y.length; i++) {
    if ((valid && valid[i] !== 1) || !Number.isFinite(y[i])) continue;
    n++;
    st += i;
    sy += y[i];
  }
  if (n < 3) throw new ScienceInputError('y', 'a drift needs at least three valid samples');
  const tBar = st / n;
  const yBar = sy / n;
  let stt = 0;
  let sty = 0;
  for (let i = 0; i < y.length; i++) {
    if ((valid && valid[i] !== 1) || !Number.isFinite(y[i])) continue;
    stt += (i - tBar) ** 2;
    sty += (i - tBar) * (y[i] - yBar);
  }
  const bPerSample = sty / stt;
  let ssr = 0;
  for (let i = 0; i < y.length; i++) {
    if ((valid && valid[i] !== 1) || !Number.isFinite(y[i])) continue;
    ssr += (y[i] - yBar - bPerSample * (i - tBar)) ** 2;
  }
  const uPerSample = Math.sqrt(ssr / (n - 2) / stt);
  return { bPerSample, uPerSample, tBar };
}

/** The drift fit alone, without the detrended copy of y (for callers that only state the drift). */
export function fitLinearDrift(y: Float64Array, tau0Seconds: number, valid?: Uint8Array): Omit<LinearDrift, 'detrended'> {
  return inSeconds(leastSquaresDrift(y, valid), tau0Seconds);
}

function inSeconds(fit: { bPerSample: number; uPerSample: number; tBar: number }, tau0Seconds: number): Omit<LinearDrift, 'detrended'> {
  return { slopePerSecond: fit.bPerSample / tau0Seconds, slopeUncertaintyPerSecond: fit.uPerSample / tau0Seconds, referenceEpochSeconds: fit.tBar * tau0Seconds };
}

/** The fit of fitLinearDrift and y with the fitted drift removed about the reference epoch (gaps unchanged). */
export function estimateLinearDrift(y: Float64Array, tau0Seconds: number, valid?: Uint8Array): LinearDrift {
  const fit = leastSquaresDrift(y, valid);
  const { bPerSample, tBar } = fit;
  const detrended = new Float64Array(y.length);
  for (let i = 0; i < y.length; i++) {
    const v = y[i];
    detrended[i] = Number.isFinite(v) ? v - bPerSample * (i - tBar) : v;
  }
  return { ...inSeconds(fit, tau0Seconds), detrended };
}
