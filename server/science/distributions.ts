// Normal and χ² distribution functions and quantiles for the adjustment tests.
// Regularised incomplete gamma by series / Lentz continued fraction and ln Γ by Lanczos (Press et al., Numerical Recipes,
// 3rd ed., 2007, §6.1–6.2); χ² start value by Wilson & Hilferty (PNAS 17, 1931) refined by Newton; normal quantile start by
// Acklam's rational approximation (2003) refined by Halley steps on erfc expressed through Q(1/2, x²) (Abramowitz & Stegun 7.1.2, 6.5).

const LANCZOS_G = 7;
const LANCZOS_COEF = [
  0.99999999999980993, 676.5203681218851, -1259.1392167224028, 771.32342877765313, -176.61502916214059,
  12.507343278686905, -0.13857109526572012, 9.9843695780195716e-6, 1.5056327351493116e-7,
];

/** ln Γ(x) for x > 0 (Lanczos, g = 7, n = 9; relative error about 1e-15). */
export function logGamma(x: number): number {
  if (x < 0.5) return Math.log(Math.PI / Math.sin(Math.PI * x)) - logGamma(1 - x);
  const xm = x - 1;
  let a = LANCZOS_COEF[0];
  const t = xm + LANCZOS_G + 0.5;
  for (let i = 1; i < LANCZOS_G + 2; i++) a += LANCZOS_COEF[i] / (xm + i);
  return 0.5 * Math.log(2 * Math.PI) + (xm + 0.5) * Math.log(t) - t + Math.log(a);
}

const EPS = 1e-16;
const TINY = 1e-300;

/** Regularised lower incomplete gamma P(a, x). */
export function gammaP(a: number, x: number): number {
  if (x <= 0) return 0;
  if (x < a + 1) return gammaSeries(a, x);
  return 1 - gammaContinuedFraction(a, x);
}

/** Regularised upper incomplete gamma Q(a, x) = 1 − P(a, x), accurate in the far tail. */
export function gammaQ(a: number, x: number): number {
  if (x <= 0) return 1;
  if (x < a + 1) return 1 - gammaSeries(a, x);
  return gammaContinuedFraction(a, x);
}

function gammaSeries(a: number, x: number): number {
  let ap = a;
  let sum = 1 / a;
  let del = sum;
  for (let n = 0; n < 10000; n++) {
    ap += 1;
    del *= x / ap;
    sum += del;
    if (Math.abs(del) < Math.abs(sum) * EPS) break;
  }
  return sum * Math.exp(-x + a * Math.log(x) - logGamma(a));
}

function gammaContinuedFraction(a: number, x: number): number {
  let b = x + 1 - a;
  let c = 1 / TINY;
  let d = 1 / b;
  let h = d;
  for (let i = 1; i < 10000; i++) {
    const an = -i * (i - a);
    b += 2;
    d = an * d + b;
    if (Math.abs(d) < TINY) d = TINY;
    c = b + an / c;
    if (Math.abs(c) < TINY) c = TINY;
    d = 1 / d;
    const del = d * c;
    h *= del;
    if (Math.abs(del - 1) < EPS) break;
  }
  return Math.exp(-x + a * Math.log(x) - logGamma(a)) * h;
}

/** χ² cumulative distribution function with nu degrees of freedom. */
export function chiSquareCdf(x: number, nu: number): number {
  return gammaP(nu / 2, x / 2);
}

/** χ² upper tail 1 − CDF, accurate for small tail probabilities (p-value of the global test). */
export function chiSquareSurvival(x: number, nu: number): number {
  return gammaQ(nu / 2, x / 2);
}

/**
 * χ² quantile: the x with P(χ²_nu ≤ x) = p. Wilson–Hilferty gives a start within a few per cent;
 * Newton steps on P(nu/2, x/2) − p (derivative = χ² density), kept inside a bisection bracket,
 * converge to full double precision. For p above 0.5 the upper tail Q is used so that tiny tail
 * probabilities keep their relative accuracy.
 */
export function chiSquareQuantile(p: number, nu: number): number {
  if (!(nu > 0)) throw new RangeError('degrees of freedom must be positive');
  if (!(p >= 0 && p <= 1)) throw new RangeError('probability must lie in [0, 1]');
  if (p === 0) return 0;
  if (p === 1) return Number.POSITIVE_INFINITY;
  const a = nu / 2;
  const z = normalQuantile(p);
  const h = 2 / (9 * nu);
  const wh = 1 - h + z * Math.sqrt(h);
  // Near zero Wilson–Hilferty fails; there P(a, x/2) ≈ (x/2)^a / Γ(a + 1) gives the start instead.
  let x = wh > 0.2 ? nu * wh * wh * wh : 2 * Math.exp((Math.log(p) + logGamma(a + 1)) / a);
  if (!(x > 0) || !Number.isFinite(x)) x = nu;
  const upper = p > 0.5;
  const target = upper ? 1 - p : p;
  const f = (t: number): number => (upper ? target - gammaQ(a, t / 2) : gammaP(a, t / 2) - target);
  let lo = 0;
  let hi = Number.POSITIVE_INFINITY;
  const logNorm = -a * Math.log(2) - logGamma(a);
  for (let it = 0; it < 200; it++) {
    const fx = f(x);
    if (fx === 0) return x;
    if (fx < 0) lo = x;
    else hi = x;
    const density = Math.exp(logNorm + (a - 1) * Math.log(x) - x / 2);
    let xNew = x - fx / density;
    if (!(xNew > lo && xNew < hi) || !Number.isFinite(xNew)) xNew = Number.isFinite(hi) ? (lo + hi) / 2 : 2 * x + 1;
    if (Math.abs(xNew - x) <= 1e-15 * x) return xNew;
    x = xNew;
  }
  return x;
}

/** Complementary error function via erfc(x) = Q(1/2, x²) for x ≥ 0 (Abramowitz & Stegun 6.5.17, 7.1.2). */
export function erfc(x: number): number {
  if (x >= 0) return gammaQ(0.5, x * x);
  return 2 - gammaQ(0.5, x * x);
}

/** Standard normal cumulative distribution function Φ(x). */
export function normalCdf(x: number): number {
  return 0.5 * erfc(-x / Math.SQRT2);
}

/** Standard normal upper tail 1 − Φ(x), accurate for large x. */
function normalUpperTail(x: number): number {
  return 0.5 * erfc(x / Math.SQRT2);
}

const ACKLAM_A = [-3.969683028665376e1, 2.209460984245205e2, -2.759285104469687e2, 1.38357751867269e2, -3.066479806614716e1, 2.506628277459239];
const ACKLAM_B = [-5.447609879822406e1, 1.615858368580409e2, -1.556989798598866e2, 6.680131188771972e1, -1.328068155288572e1];
const ACKLAM_C = [-7.784894002430293e-3, -3.223964580411365e-1, -2.400758277161838, -2.549732539343734, 4.374664141464968, 2.938163982698783];
const ACKLAM_D = [7.784695709041462e-3, 3.224671290700398e-1, 2.445134137142996, 3.754408661907416];

/** Standard normal quantile Φ⁻¹(p). */
export function normalQuantile(p: number): number {
  if (!(p >= 0 && p <= 1)) throw new RangeError('probability must lie in [0, 1]');
  if (p === 0) return Number.NEGATIVE_INFINITY;
  if (p === 1) return Number.POSITIVE_INFINITY;
  const pLow = 0.02425;
  let x: number;
  if (p < pLow) {
    const q = Math.sqrt(-2 * Math.log(p));
    x = (((((ACKLAM_C[0] * q + ACKLAM_C[1]) * q + ACKLAM_C[2]) * q + ACKLAM_C[3]) * q + ACKLAM_C[4]) * q + ACKLAM_C[5]) /
      ((((ACKLAM_D[0] * q + ACKLAM_D[1]) * q + ACKLAM_D[2]) * q + ACKLAM_D[3]) * q + 1);
  } else if (p <= 1 - pLow) {
    const q = p - 0.5;
    const r = q * q;
    x = ((((((ACKLAM_A[0] * r + ACKLAM_A[1]) * r + ACKLAM_A[2]) * r + ACKLAM_A[3]) * r + ACKLAM_A[4]) * r + ACKLAM_A[5]) * q) /
      (((((ACKLAM_B[0] * r + ACKLAM_B[1]) * r + ACKLAM_B[2]) * r + ACKLAM_B[3]) * r + ACKLAM_B[4]) * r + 1);
  } else {
    const q = Math.sqrt(-2 * Math.log(1 - p));
    x = -(((((ACKLAM_C[0] * q + ACKLAM_C[1]) * q + ACKLAM_C[2]) * q + ACKLAM_C[3]) * q + ACKLAM_C[4]) * q + ACKLAM_C[5]) /
      ((((ACKLAM_D[0] * q + ACKLAM_D[1]) * q + ACKLAM_D[2]) * q + ACKLAM_D[3]) * q + 1);
  }
  // Halley refinement; the residual is taken in the tail that keeps relative precision.
  for (let it = 0; it < 3; it++) {
    const e = x > 0 ? (1 - p) - normalUpperTail(x) : normalCdf(x) - p;
    const u = e * Math.sqrt(2 * Math.PI) * Math.exp((x * x) / 2);
    x = x - u / (1 + (x * u) / 2);
  }
  return x;
}

/** Continued fraction of the regularised incomplete beta function (Numerical Recipes 3rd ed. §6.4, modified Lentz). */
function betaContinuedFraction(a: number, b: number, x: number): number {
  const qab = a + b;
  const qap = a + 1;
  const qam = a - 1;
  let c = 1;
  let d = 1 - (qab * x) / qap;
  if (Math.abs(d) < TINY) d = TINY;
  d = 1 / d;
  let h = d;
  for (let m = 1; m < 10000; m++) {
    const m2 = 2 * m;
    let aa = (m * (b - m) * x) / ((qam + m2) * (a + m2));
    d = 1 + aa * d;
    if (Math.abs(d) < TINY) d = TINY;
    c = 1 + aa / c;
    if (Math.abs(c) < TINY) c = TINY;
    d = 1 / d;
    h *= d * c;
    aa = (-(a + m) * (qab + m) * x) / ((a + m2) * (qap + m2));
    d = 1 + aa * d;
    if (Math.abs(d) < TINY) d = TINY;
    c = 1 + aa / c;
    if (Math.abs(c) < TINY) c = TINY;
    d = 1 / d;
    const del = d * c;
    h *= del;
    if (Math.abs(del - 1) < EPS) break;
  }
  return h;
}

/** Regularised incomplete beta I_x(a, b) (Numerical Recipes 3rd ed. §6.4, eq. 6.4.5 symmetry for convergence). */
export function incompleteBeta(a: number, b: number, x: number): number {
  if (x <= 0) return 0;
  if (x >= 1) return 1;
  const front = Math.exp(logGamma(a + b) - logGamma(a) - logGamma(b) + a * Math.log(x) + b * Math.log(1 - x));
  if (x < (a + 1) / (a + b + 2)) return (front * betaContinuedFraction(a, b, x)) / a;
  return 1 - (front * betaContinuedFraction(b, a, 1 - x)) / b;
}

/** Student t cumulative distribution function with nu degrees of freedom: 1 − ½·I_{ν/(ν+t²)}(ν/2, ½) for t ≥ 0. */
export function studentTCdf(t: number, nu: number): number {
  if (!(nu > 0)) throw new RangeError('degrees of freedom must be positive');
  if (nu === Infinity) return normalCdf(t);
  const tail = 0.5 * incompleteBeta(nu / 2, 0.5, nu / (nu + t * t));
  return t >= 0 ? 1 - tail : tail;
}

/**
 * Student t quantile t with P(T ≤ t) = p (nu may be fractional or Infinity, which gives the normal quantile).
 * Bisection on the upper tail ½·I_{ν/(ν+t²)}(ν/2, ½), which keeps its relative precision for p near 1.
 */
export function studentTQuantile(p: number, nu: number): number {
  if (!(nu > 0)) throw new RangeError('degrees of freedom must be positive');
  if (!(p > 0 && p < 1)) throw new RangeError('probability must lie strictly between 0 and 1');
  if (nu === Infinity) return normalQuantile(p);
  if (p < 0.5) return -studentTQuantile(1 - p, nu);
  const target = 1 - p;
  const tail = (t: number): number => 0.5 * incompleteBeta(nu / 2, 0.5, nu / (nu + t * t));
  let lo = 0;
  let hi = Math.max(1, normalQuantile(p));
  while (tail(hi) > target) hi *= 2;
  for (let it = 0; it < 200 && hi - lo > 1e-14 * hi; it++) {
    const mid = (lo + hi) / 2;
    if (tail(mid) > target) lo = mid;
    else hi = mid;
  }
  return (lo + hi) / 2;
}
