// Simulated clock-comparison records for the Monte Carlo coverage checks (JCGM 101:2008 §7): seeded normal deviates and
// power-law frequency noise by the discrete filter of N. J. Kasdin & T. Walter, "Discrete simulation of power law noise",
// Proc. 1992 IEEE Frequency Control Symposium, pp. 274–283: h_0 = 1, h_k = h_{k−1}·(β/2 + k − 1)/k for S_y ∝ f^−β,
// applied as a linear convolution by FFT (the record starts at rest, as in the paper).

/** Seeded uniform RNG (mulberry32): common practice for reproducible simulations. */
export function uniformRng(seed: number): () => number {
  let a = seed >>> 0;
  return (): number => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

/** Box–Muller normals from a uniform RNG. */
export function gaussianFrom(uniform: () => number): () => number {
  return () => Math.sqrt(-2 * Math.log(1 - uniform())) * Math.cos(2 * Math.PI * uniform());
}

/** In-place iterative radix-2 FFT (Cooley–Tukey); inverse without the 1/n factor. */
function fft(re: Float64Array, im: Float64Array, inverse: boolean): void {
  const n = re.length;
  for (let i = 1, j = 0; i < n; i++) {
    let bit = n >> 1;
    for (; j & bit; bit >>= 1) j ^= bit;
    j ^= bit;
    if (i < j) {
      [re[i], re[j]] = [re[j], re[i]];
      [im[i], im[j]] = [im[j], im[i]];
    }
  }
  for (let len = 2; len <= n; len <<= 1) {
    const angle = ((inverse ? 2 : -2) * Math.PI) / len;
    const wr = Math.cos(angle);
    const wi = Math.sin(angle);
    for (let i = 0; i < n; i += len) {
      let cr = 1;
      let ci = 0;
      for (let k = 0; k < len / 2; k++) {
        const ar = re[i + k + len / 2] * cr - im[i + k + len / 2] * ci;
        const ai = re[i + k + len / 2] * ci + im[i + k + len / 2] * cr;
        re[i + k + len / 2] = re[i + k] - ar;
        im[i + k + len / 2] = im[i + k] - ai;
        re[i + k] += ar;
        im[i + k] += ai;
        const nr = cr * wr - ci * wi;
        ci = cr * wi + ci * wr;
        cr = nr;
      }
    }
  }
}

/** n samples of fractional-frequency noise with S_y ∝ f^−β (β = 0 white FM, 1 flicker FM, 2 random-walk FM), unit white input. */
export function powerLawFrequencyNoise(n: number, beta: number, next: () => number): Float64Array {
  let size = 1;
  while (size < 2 * n) size <<= 1;
  const hr = new Float64Array(size);
  const hi = new Float64Array(size);
  const wr = new Float64Array(size);
  const wi = new Float64Array(size);
  hr[0] = 1;
  for (let k = 1; k < n; k++) hr[k] = (hr[k - 1] * (beta / 2 + k - 1)) / k;
  for (let k = 0; k < n; k++) wr[k] = next();
  fft(hr, hi, false);
  fft(wr, wi, false);
  for (let k = 0; k < size; k++) {
    const r = hr[k] * wr[k] - hi[k] * wi[k];
    const i = hr[k] * wi[k] + hi[k] * wr[k];
    wr[k] = r;
    wi[k] = i;
  }
  fft(wr, wi, true);
  return Float64Array.from({ length: n }, (_, k) => wr[k] / size);
}

export type CoverageCase = 'white FM' | 'white FM + white PM' | 'white FM with gaps' | 'white FM + flicker-FM floor' | 'flicker FM';
export const COVERAGE_CASES: readonly CoverageCase[] = ['white FM', 'white FM + white PM', 'white FM with gaps', 'white FM + flicker-FM floor', 'flicker FM'];

export interface SimulatedCampaign {
  y: Float64Array;
  valid: Uint8Array;
  tau0Seconds: number;
  injected: number;
}

/**
 * One simulated campaign of n samples at τ0 = 1 s around an injected offset (1e-16 + small, arbitrary), noise in units of
 * σ_WFM(1 s) = 1e-15. White PM: phase noise of 3.2 fs per sample (crossing white FM near τ = 30 s). Gaps: about a fifth
 * of the record dead in random outages of 1 … n/30 samples, plus 1 % single flagged samples. Flicker-FM floor: Kasdin–Walter
 * flicker with σ_y²(τ) floor equal to the white FM at τ = n/80 (the floor dominates the long-τ end). Flicker FM alone: unit input.
 */
export function simulateCampaign(kind: CoverageCase, n: number, seed: number): SimulatedCampaign {
  const uniform = uniformRng(seed);
  const next = gaussianFrom(uniform);
  const scale = 1e-15;
  const injected = 1e-16 * (1 + (seed % 7));
  const y = new Float64Array(n);
  const valid = new Uint8Array(n).fill(1);
  const white = (): Float64Array => Float64Array.from({ length: n }, () => next());
  switch (kind) {
    case 'white FM': {
      const w = white();
      for (let i = 0; i < n; i++) y[i] = injected + scale * w[i];
      break;
    }
    case 'white FM + white PM': {
      const w = white();
      const x = Float64Array.from({ length: n + 1 }, () => 3.2 * next());
      for (let i = 0; i < n; i++) y[i] = injected + scale * (w[i] + x[i + 1] - x[i]);
      break;
    }
    case 'white FM with gaps': {
      const w = white();
      for (let i = 0; i < n; i++) y[i] = injected + scale * w[i];
      let dead = 0;
      const maxOutage = Math.max(2, Math.floor(n / 30));
      while (dead < n / 5) {
        const len = 1 + Math.floor(uniform() * maxOutage);
        const start = Math.floor(uniform() * (n - len));
        for (let i = start; i < start + len; i++) {
          if (valid[i]) dead++;
          valid[i] = 0;
        }
      }
      for (let i = 0; i < n; i++) if (uniform() < 0.01) valid[i] = 0;
      break;
    }
    case 'white FM + flicker-FM floor': {
      const w = white();
      // Flicker σ_y² = 2 ln2·h₋₁ with h₋₁ = σ²/π for unit input; match the white FM 1/τ at τ = n/80.
      const tauCross = n / 80;
      const amplitude = Math.sqrt(Math.PI / (2 * Math.LN2 * tauCross));
      const f = powerLawFrequencyNoise(n, 1, next);
      for (let i = 0; i < n; i++) y[i] = injected + scale * (w[i] + amplitude * f[i]);
      break;
    }
    case 'flicker FM': {
      const f = powerLawFrequencyNoise(n, 1, next);
      for (let i = 0; i < n; i++) y[i] = injected + scale * f[i];
      break;
    }
  }
  return { y, valid, tau0Seconds: 1, injected };
}
