// Equivalent degrees of freedom of the Allan, modified Allan (and time) and Hadamard variances for power-law noise,
// after C. A. Greenhall & W. J. Riley, "Uncertainty of stability variances based on finite differences", Proc. 35th
// PTTI Meeting (2003), eqs. (7)–(10) and Tables 1–3: the variance of the estimator follows from the generalised
// autocovariance of the phase, sw(t) ∝ |t|^(−α−1) (or t^(−α−1)·ln|t| for odd α), filtered and differenced.

import { ScienceInputError } from './errors';

/** Power-law exponent α of S_y(f) ∝ f^α: +2 white PM … −2 random-walk FM (IEEE Std 1139-2008). */
export type PowerLawAlpha = 2 | 1 | 0 | -1 | -2 | -3 | -4;

/** Eq. (7): generalised autocovariance of the phase; the constant factor cancels in the EDF. */
function sw(t: number, alpha: number): number {
  const a = Math.abs(t);
  switch (alpha) {
    case 2: return -a;
    case 1: return a === 0 ? 0 : t * t * Math.log(a);
    case 0: return a ** 3;
    case -1: return a === 0 ? 0 : t ** 4 * Math.log(a);
    case -2: return a ** 5;
    case -3: return a === 0 ? 0 : t ** 6 * Math.log(a);
    case -4: return a ** 7;
    default: throw new ScienceInputError('alpha', 'must be an integer from −4 to 2');
  }
}

/** Eq. (8): the phase averaged over τ/F (F = 1 modified variance, F = m unmodified, F = ∞ the continuous limit). */
function sx(t: number, F: number, alpha: number): number {
  if (F === Infinity) return sw(t, alpha + 2);
  return F * F * (2 * sw(t, alpha) - sw(t - 1 / F, alpha) - sw(t + 1 / F, alpha));
}

/** Binomial coefficient C(n, k) for the small n used here. */
function binomial(n: number, k: number): number {
  let r = 1;
  for (let i = 1; i <= k; i++) r = (r * (n - k + i)) / i;
  return r;
}

/** Eq. (9): autocovariance of the d-th difference, Σ_k (−1)^k C(2d, d+k)·sx(t + k) over k = −d … d. */
function sz(t: number, F: number, alpha: number, d: number): number {
  let sum = 0;
  for (let k = -d; k <= d; k++) sum += (k % 2 === 0 ? 1 : -1) * binomial(2 * d, d + Math.abs(k)) * sx(t + k, F, alpha);
  return sum;
}

/** Eq. (10): the basic sum. */
function basicSum(J: number, M: number, S: number, F: number, alpha: number, d: number): number {
  let sum = sz(0, F, alpha, d) ** 2 + (1 - J / M) * sz(J / S, F, alpha, d) ** 2;
  for (let j = 1; j < J; j++) sum += 2 * (1 - j / M) * sz(j / S, F, alpha, d) ** 2;
  return sum;
}

/** Table 1 (modified variances, large r): (a0, a1) by α = 2 … −4 (rows) and d = 1 … 3 (columns); NaN where α + 2d ≤ 1. */
const TABLE1: readonly (readonly [number, number])[][] = [
  [[2 / 3, 1 / 3], [7 / 9, 1 / 2], [22 / 25, 2 / 3]],
  [[0.84, 0.345], [0.997, 0.616], [1.141, 0.843]],
  [[1.079, 0.368], [1.033, 0.607], [1.184, 0.848]],
  [[NaN, NaN], [1.048, 0.534], [1.18, 0.816]],
  [[NaN, NaN], [1.302, 0.535], [1.175, 0.777]],
  [[NaN, NaN], [NaN, NaN], [1.194, 0.703]],
  [[NaN, NaN], [NaN, NaN], [1.489, 0.702]],
];
/** Table 2 (unmodified variances, large r). */
const TABLE2: readonly (readonly [number, number])[][] = [
  [[3 / 2, 1 / 2], [35 / 18, 1], [231 / 100, 3 / 2]],
  [[78.6, 25.2], [790, 410], [9950, 6520]],
  [[2 / 3, 1 / 6], [2 / 3, 1 / 3], [7 / 9, 1 / 2]],
  [[NaN, NaN], [0.852, 0.375], [0.997, 0.617]],
  [[NaN, NaN], [1.079, 0.368], [1.033, 0.607]],
  [[NaN, NaN], [NaN, NaN], [1.053, 0.553]],
  [[NaN, NaN], [NaN, NaN], [1.302, 0.535]],
];
/** Table 3 (unmodified, α = 1): sz(0, m) ≈ b0 + b1·ln m. */
const TABLE3: readonly (readonly [number, number])[] = [[6, 4], [15.23, 12], [47.8, 40]];

const J_MAX = 100;

export interface EdfOptions {
  /** Order of the phase difference: 2 Allan (and modified Allan / time), 3 Hadamard. */
  d: 2 | 3;
  overlapping: boolean;
  /** True for the modified Allan and the time variance. */
  modified: boolean;
}

/**
 * Greenhall–Riley EDF of a stability variance at averaging factor m from N phase points (N − 1 frequency samples),
 * for noise exponent α. Returns NaN when the estimator has no term (N too small) or α + 2d ≤ 1 (variance undefined).
 */
export function greenhallEdf(alpha: PowerLawAlpha, m: number, N: number, opts: EdfOptions): number {
  const { d, overlapping, modified } = opts;
  if (!(alpha + 2 * d > 1)) return NaN;
  const F = modified ? 1 : m;
  const S = overlapping ? m : 1;
  const L = m / F + m * d;
  if (N < L) return NaN;
  const M = 1 + Math.floor((S * (N - L)) / m);
  const J = Math.min(M, (d + 1) * S);
  const r = M / S;
  const row = 2 - alpha;
  const col = d - 1;
  if (modified) {
    if (J <= J_MAX) return 1 / (basicSum(J, M, S, 1, alpha, d) / (sz(0, 1, alpha, d) ** 2 * M));
    if (r > d + 1) {
      const [a0, a1] = TABLE1[row][col];
      return 1 / ((a0 - a1 / r) / r);
    }
    const mPrime = J_MAX / r;
    return 1 / (basicSum(J_MAX, J_MAX, mPrime, 1, alpha, d) / (sz(0, 1, alpha, d) ** 2 * J_MAX));
  }
  if (alpha <= 0) {
    if (J <= J_MAX) {
      // The paper's F = ∞ variant: phase points that are exact integrals of the frequency averages (no further
      // averaging of x over τ0). It reproduces the exact white-FM EDF at m = 1, 2(N − 2)/3, and simulated EDFs of
      // frequency data (tests/unit/science/edf.test.ts); F = m models phase averaged over τ0 and is off by up to 17 % at m = 1.
      const mPrime = Infinity;
      return 1 / (basicSum(J, M, S, mPrime, alpha, d) / (sz(0, mPrime, alpha, d) ** 2 * M));
    }
    if (r > d + 1) {
      const [a0, a1] = TABLE2[row][col];
      return 1 / ((a0 - a1 / r) / r);
    }
    const mPrime = J_MAX / r;
    return 1 / (basicSum(J_MAX, J_MAX, mPrime, Infinity, alpha, d) / (sz(0, Infinity, alpha, d) ** 2 * J_MAX));
  }
  if (alpha === 1) {
    if (J <= J_MAX) return 1 / (basicSum(J, M, S, m, 1, d) / (sz(0, m, 1, d) ** 2 * M));
    const [b0, b1] = TABLE3[col];
    const sz0 = b0 + b1 * Math.log(m);
    if (r > d + 1) {
      const [a0, a1] = TABLE2[row][col];
      return 1 / ((a0 - a1 / r) / (sz0 * sz0 * r));
    }
    const mPrime = J_MAX / r;
    return 1 / (basicSum(J_MAX, J_MAX, mPrime, mPrime, 1, d) / (sz0 * sz0 * J_MAX));
  }
  // α = 2, unmodified: the closed form of the paper for K = ⌈r⌉ > d; for shorter records the basic sum with F = m.
  if (Math.ceil(r) > d) {
    const a0 = binomial(4 * d, 2 * d) / binomial(2 * d, d) ** 2;
    const a1 = d / 2;
    return 1 / ((a0 - a1 / r) / M);
  }
  return 1 / (basicSum(J, M, S, m, 2, d) / (sz(0, m, 2, d) ** 2 * M));
}

/**
 * Expected ratio of the modified to the unmodified Allan variance, R(n) = Mod σ²_y(τ)/σ²_y(τ) at n = m
 * (SP 1065 §5.6 uses it to tell white from flicker PM), from the same autocovariance: sz(0, F = 1)/sz(0, F = m),
 * with the modified variance's 1/m² normalisation of the phase average already inside sx.
 */
export function expectedModRatio(alpha: PowerLawAlpha, m: number): number {
  return sz(0, 1, alpha, 2) / sz(0, m, alpha, 2);
}
