// Chi-square distribution: regularized lower incomplete gamma P(a, x) by series / Lentz continued fraction
// (Press et al., Numerical Recipes 3rd ed. §6.2) and its inverse, started from the Wilson–Hilferty
// approximation (Wilson & Hilferty 1931) and refined by safeguarded Newton steps. Used for Allan-deviation confidence intervals.

import { ScienceInputError } from './errors';

const LANCZOS = [
  0.99999999999980993, 676.5203681218851, -1259.1392167224028, 771.32342877765313, -176.61502916214059,
  12.507343278686905, -0.13857109526572012, 9.9843695780195716e-6, 1.5056327351493116e-7,
];

/** ln Γ(z) for z > 0 (Lanczos, g = 7), relative error ~1e-15. */
export function logGamma(z: number): number {
  if (z < 0.5) return Math.log(Math.PI / Math.sin(Math.PI * z)) - logGamma(1 - z);
  const zz = z - 1;
  let sum = LANCZOS[0];
  for (let i = 1; i < 9; i++) sum += LANCZOS[i] / (zz + i);
  const t = zz + 7.5;
  return 0.5 * Math.log(2 * Math.PI) + (zz + 0.5) * Math.log(t) - t + Math.log(sum);
}

/** Regularized lower incomplete gamma P(a, x). */
export function regularizedGammaP(a: number, x: number): number {
  if (x <= 0) return 0;
  const logPrefix = -x + a * Math.log(x) - logGamma(a);
  if (x < a + 1) {
    let term = 1 / a;
    let sum = term;
    for (let n = 1; n < 10_000; n++) {
      term *= x / (a + n);
      sum += term;
      if (Math.abs(term) < Math.abs(sum) * 1e-16) break;
    }
    return sum * Math.exp(logPrefix);
  }
  const tiny = 1e-300;
  let b = x + 1 - a;
  let c = 1 / tiny;
  let d = 1 / b;
  let h = d;
  for (let i = 1; i < 10_000; i++) {
    const an = -i * (i - a);
    b += 2;
    d = an * d + b;
    if (Math.abs(d) < tiny) d = tiny;
    c = b + an / c;
    if (Math.abs(c) < tiny) c = tiny;
    d = 1 / d;
    const delta = d * c;
    h *= delta;
    if (Math.abs(delta - 1) < 1e-16) break;
  }
  return 1 - Math.exp(logPrefix) * h;
}

/** CDF of the chi-square distribution with ν degrees of freedom (ν may be non-integer, as EDFs are). */
export function chiSquareCdf(x: number, dof: number): number {
  return regularizedGammaP(dof / 2, x / 2);
}

function inverseStandardNormal(p: number): number {
  // Acklam's rational approximation (|rel. error| < 1.2e-9); only a starting value here.
  const a = [-39.69683028665376, 220.9460984245205, -275.9285104469687, 138.357751867269, -30.66479806614716, 2.506628277459239];
  const b = [-54.47609879822406, 161.5858368580409, -155.6989798598866, 66.80131188771972, -13.28068155288572];
  const c = [-0.007784894002430293, -0.3223964580411365, -2.400758277161838, -2.549732539343734, 4.374664141464968, 2.938163982698783];
  const d = [0.007784695709041462, 0.3224671290700398, 2.445134137142996, 3.754408661907416];
  const pLow = 0.02425;
  if (p < pLow) {
    const q = Math.sqrt(-2 * Math.log(p));
    return (((((c[0] * q + c[1]) * q + c[2]) * q + c[3]) * q + c[4]) * q + c[5]) / ((((d[0] * q + d[1]) * q + d[2]) * q + d[3]) * q + 1);
  }
  if (p > 1 - pLow) return -inverseStandardNormal(1 - p);
  const q = p - 0.5;
  const r = q * q;
  return ((((((a[0] * r + a[1]) * r + a[2]) * r + a[3]) * r + a[4]) * r + a[5]) * q) / (((((b[0] * r + b[1]) * r + b[2]) * r + b[3]) * r + b[4]) * r + 1);
}

/** x such that P(χ²_ν ≤ x) = p. */
export function chiSquareQuantile(p: number, dof: number): number {
  if (!(p > 0 && p < 1)) throw new ScienceInputError('p', 'must lie strictly between 0 and 1');
  if (!(dof > 0) || !Number.isFinite(dof)) throw new ScienceInputError('dof', 'must be a finite positive number');
  const z = inverseStandardNormal(p);
  const h = 2 / (9 * dof);
  let x = dof * Math.pow(Math.max(1 - h + z * Math.sqrt(h), 1e-3), 3);
  let lo = 0;
  let hi = Infinity;
  const k = dof / 2;
  for (let i = 0; i < 200; i++) {
    const f = chiSquareCdf(x, dof) - p;
    if (f > 0) hi = Math.min(hi, x);
    else lo = Math.max(lo, x);
    const logPdf = (k - 1) * Math.log(x / 2) - x / 2 - logGamma(k) - Math.log(2);
    let next = x - f / Math.exp(logPdf);
    // Newton can leave the bracket for small ν where the density is steep near 0; fall back to bisection there.
    if (!(next > lo && next < hi)) next = Number.isFinite(hi) ? (lo + hi) / 2 : x * 2;
    if (Math.abs(next - x) <= 1e-14 * Math.max(1, x)) return next;
    x = next;
  }
  return x;
}
