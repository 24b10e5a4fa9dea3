// The statistical uncertainty of the mean as computed before noise identification at each τ (software 0.1.0, result
// revision 2), frozen here unchanged so the coverage benchmark and test can report "before" beside "after".
// Not used by the product.

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

import { chiSquareQuantile } from '../../server/science/distributions';
import { ScienceInputError } from '../../server/science/errors';

export type NoiseType = 'WPM' | 'FPM' | 'WFM' | 'FFM' | 'RWFM';

const NOISE_BY_ALPHA: Record<number, NoiseType> = { 2: 'WPM', 1: 'FPM', 0: 'WFM', [-1]: 'FFM', [-2]: 'RWFM' };
/** Riley & Greenhall: the lag-1 ACF estimate needs about this many averaged points. */
const MIN_POINTS_FOR_NOISE_ID = 30;

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
  /** Equivalent degrees of freedom of the OADEV estimate. */
  edf: number | null;
  noiseType: NoiseType;
  /** False when too few averaged points remained and the noise type was carried over from a shorter τ (or WFM assumed). */
  noiseIdentified: boolean;
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
  avar: number;
  nNonOverlapping: number;
  mvar: number;
  nMod: number;
}

function deviationsForM(p: PreparedFrequency, m: number, scratch: Float64Array): RawDeviations {
  const { n, prefix: s, bad } = p;
  const lastI = n - 2 * m;
  let sumO = 0;
  let cntO = 0;
  let sumA = 0;
  let cntA = 0;
  // scratch[i] = Σ_{k<i} d_k: prefix sums of the second differences, for the MDEV inner sums.
  scratch[0] = 0;
  const twoM = 2 * m;
  for (let i = 0; i <= lastI; i++) {
    const d = s[i + twoM] - 2 * s[i + m] + s[i];
    scratch[i + 1] = scratch[i] + d;
    if (bad[i + twoM] === bad[i]) {
      sumO += d * d;
      cntO++;
    }
  }
  for (let i = 0; i <= lastI; i += m) {
    if (bad[i + twoM] === bad[i]) {
      const d = scratch[i + 1] - scratch[i];
      sumA += d * d;
      cntA++;
    }
  }
  let sumM = 0;
  let cntM = 0;
  // The inner sum over d_j … d_{j+m−1} touches y_j … y_{j+3m−2}.
  const lastJ = n - 3 * m + 1;
  for (let j = 0; j <= lastJ; j++) {
    if (bad[j + 3 * m - 1] === bad[j]) {
      const inner = scratch[j + m] - scratch[j];
      sumM += inner * inner;
      cntM++;
    }
  }
  const m2 = m * m;
  return {
    oavar: cntO > 0 ? sumO / (2 * m2 * cntO) : NaN,
    nOverlapping: cntO,
    avar: cntA > 0 ? sumA / (2 * m2 * cntA) : NaN,
    nNonOverlapping: cntA,
    mvar: cntM > 0 ? sumM / (2 * m2 * m2 * cntM) : NaN,
    nMod: cntM,
  };
}

function lag1Autocorrelation(z: Float64Array): { r1: number; pairs: number } {
  // Gaps are NaN; block means of finite data are never infinite, so `v === v` is the gap test.
  let sum = 0;
  let cnt = 0;
  for (let i = 0; i < z.length; i++) {
    const v = z[i];
    if (v === v) {
      sum += v;
      cnt++;
    }
  }
  const mean = sum / cnt;
  let num = 0;
  let den = 0;
  let pairs = 0;
  let previous = NaN;
  for (let i = 0; i < z.length; i++) {
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
  const blocks = Math.floor(p.n / m);
  if (blocks < MIN_POINTS_FOR_NOISE_ID) return null;
  let z: Float64Array = new Float64Array(blocks);
  for (let k = 0; k < blocks; k++) {
    const a = k * m;
    const b = a + m;
    z[k] = p.bad[b] === p.bad[a] ? (p.prefix[b] - p.prefix[a]) / m : NaN;
  }
  for (let d = 0; d <= 2; d++) {
    const { r1, pairs } = lag1Autocorrelation(z);
    if (pairs < MIN_POINTS_FOR_NOISE_ID - 1) return null;
    const delta = r1 / (1 + r1);
    if (delta < 0.25 || d === 2) {
      const alpha = Math.max(-2, Math.min(2, -Math.round(2 * delta) - 2 * d));
      return NOISE_BY_ALPHA[alpha];
    }
    const next = new Float64Array(z.length - 1);
    for (let i = 0; i < next.length; i++) next[i] = z[i + 1] - z[i];
    z = next;
  }
  return null;
}

/**
 * Equivalent degrees of freedom of the overlapping Allan variance: the simple approximations of NIST SP 1065 §5.3
 * (Table 5; Howe, Allan & Barnes 1981 — formula layout from memory), with N the number of phase points and m the
 * averaging factor. Gapped data use N = (number of terms) + 2m, the phase count of an unbroken record with as many terms.
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
  const points: StabilityPoint[] = [];
  let carried: NoiseType = 'WFM';
  for (const m of [...ms].sort((a, b) => a - b)) {
    if (2 * m > prepared.n) continue;
    const raw = deviationsForM(prepared, m, scratch);
    const tauSeconds = m * tau0;
    const identified = identifyNoiseType(prepared, m);
    const noiseType: NoiseType = identified ?? carried;
    carried = noiseType;
    const adev = Math.sqrt(raw.oavar);
    const mdev = Math.sqrt(raw.mvar);
    const edf = raw.nOverlapping > 0 ? oadevEdf(noiseType, raw.nOverlapping + 2 * m, m) : NaN;
    let adevLow = NaN;
    let adevHigh = NaN;
    if (edf > 0 && Number.isFinite(adev)) {
      adevLow = adev * Math.sqrt(edf / chiSquareQuantile((1 + confidence) / 2, edf));
      adevHigh = adev * Math.sqrt(edf / chiSquareQuantile((1 - confidence) / 2, edf));
    }
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
      tdev: finiteOrNull((tauSeconds / Math.sqrt(3)) * mdev),
      edf: finiteOrNull(edf),
      noiseType,
      noiseIdentified: identified !== null,
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
    spacings.sort();
    const median = spacings[Math.floor((n - 1) / 2)];
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

export interface MeanWithUncertainty {
  mean: number;
  statisticalUncertainty: number | null;
  validSamples: number;
  /** Time actually averaged: valid samples × τ0 (dead time excluded). */
  totalAveragingTimeSeconds: number;
  tauFitSeconds: number | null;
  method: string;
}

/** EDF below which an ADEV point is too uncertain to anchor the extrapolation. */
const MIN_EDF_FOR_FIT = 10;

/**
 * Weighted mean of the valid y and its statistical uncertainty from the stability at the full averaging time:
 * σ_y(τ_total) = ADEV(τ_fit)·√(τ_fit/τ_total), τ_fit the longest τ whose ADEV has EDF ≥ 10, provided the noise there is
 * white FM (or a phase noise, which averages down faster, making the extrapolation conservative). If the longest
 * reliable τ shows flicker or random-walk FM, the ADEV at that τ is used without reduction (flicker floor assumption).
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
  for (let i = 0; i < y.length; i++) {
    if ((valid && valid[i] !== 1) || !Number.isFinite(y[i])) continue;
    const w = weights ? weights[i] : 1;
    if (!(w >= 0)) throw new ScienceInputError(`weights[${i}]`, 'must be non-negative');
    sw += w;
    swy += w * y[i];
    count++;
  }
  if (count === 0 || sw === 0) throw new ScienceInputError('y', 'no valid samples to average');
  const mean = swy / sw;
  const totalSeconds = count * tau0Seconds;
  const points = input.points ?? stabilityAnalysis({ y, tau0Seconds, valid });
  const reliable = points.filter((p) => p.adev !== null && p.edf !== null && p.edf >= MIN_EDF_FOR_FIT);
  const anchor = reliable.length > 0 ? reliable[reliable.length - 1] : points.filter((p) => p.adev !== null).pop();
  if (!anchor || anchor.adev === null) {
    return { mean, statisticalUncertainty: null, validSamples: count, totalAveragingTimeSeconds: totalSeconds, tauFitSeconds: null, method: 'too few samples for any Allan deviation; no statistical uncertainty' };
  }
  const averagesDown = anchor.noiseType === 'WFM' || anchor.noiseType === 'WPM' || anchor.noiseType === 'FPM';
  const weak = reliable.length === 0 ? ' (no ADEV point reached EDF ≥ 10: the longest available τ was used)' : '';
  if (averagesDown) {
    return {
      mean,
      statisticalUncertainty: anchor.adev * Math.sqrt(anchor.tauSeconds / totalSeconds),
      validSamples: count,
      totalAveragingTimeSeconds: totalSeconds,
      tauFitSeconds: anchor.tauSeconds,
      method: `white-FM extrapolation σ_y(τ_total) = ADEV(τ_fit)·√(τ_fit/τ_total) from τ_fit = ${Number(anchor.tauSeconds.toPrecision(6))} s (noise ${anchor.noiseType})${weak}`,
    };
  }
  return {
    mean,
    statisticalUncertainty: anchor.adev,
    validSamples: count,
    totalAveragingTimeSeconds: totalSeconds,
    tauFitSeconds: anchor.tauSeconds,
    method: `ADEV at the longest reliable τ = ${anchor.tauSeconds} s taken as the floor without further averaging (noise ${anchor.noiseType}; under random-walk FM this can underestimate)${weak}`,
  };
}
