import { describe, expect, it } from 'vitest';
import {
  frequencyToPhase,
  gridFromEpochs,
  kthSmallest,
  meanWithStatisticalUncertainty,
  phaseToFrequency,
  stabilityAnalysis,
  type StabilityPoint,
} from '../../../server/science/stability';

/** NBS/NIST 1000-point data set (NIST SP 1065 p. 107–108; Park–Miller generator, n0 = 1 234 567 890). */
function nbs1000(): Float64Array {
  const y = new Float64Array(1000);
  let n = 1_234_567_890;
  for (let i = 0; i < 1000; i++) {
    y[i] = n / 2_147_483_647;
    n = (16_807 * n) % 2_147_483_647;
  }
  return y;
}

/** Seeded uniform RNG (mulberry32) and Box–Muller normals: common practice for reproducible noise. */
function gaussian(seed: number): () => number {
  let a = seed >>> 0;
  const uniform = (): number => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
  return () => Math.sqrt(-2 * Math.log(1 - uniform())) * Math.cos(2 * Math.PI * uniform());
}

function whiteFm(n: number, seed: number): Float64Array {
  const g = gaussian(seed);
  return Float64Array.from({ length: n }, () => g());
}

/**
 * Flicker (1/f) noise by the Kasdin & Walter (1992, Proc. IEEE FCS 274–283) discrete filter, h_0 = 1,
 * h_k = h_{k−1}(α/2 + k − 1)/k with α = 1, applied by direct convolution.
 */
function flicker(n: number, seed: number): Float64Array {
  const g = gaussian(seed);
  const w = Float64Array.from({ length: n }, () => g());
  const h = new Float64Array(n);
  h[0] = 1;
  for (let k = 1; k < n; k++) h[k] = (h[k - 1] * (0.5 + k - 1)) / k;
  const out = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    let sum = 0;
    for (let k = 0; k <= i; k++) sum += h[k] * w[i - k];
    out[i] = sum;
  }
  return out;
}

function at(points: StabilityPoint[], m: number): StabilityPoint {
  const p = points.find((q) => q.m === m);
  if (!p) throw new Error(`no point for m=${m}`);
  return p;
}

function rel(actual: number | null, expected: number): number {
  return Math.abs((actual as number) / expected - 1);
}

/**
 * Direct SP 1065 §5.2 formulas on phase, O(N·m). Phase is accumulated straight through the gap
 * samples (whatever they hold); a term is kept only if none of the frequency increments it spans is flagged bad.
 */
function bruteForce(x: Float64Array, badIncrement: Uint8Array, m: number): { oavar: number; mvar: number } {
  const N = x.length;
  const clean = (from: number, to: number): boolean => {
    for (let k = from; k < to; k++) if (badIncrement[k]) return false;
    return true;
  };
  let so = 0;
  let co = 0;
  for (let i = 0; i + 2 * m < N; i++) {
    if (!clean(i, i + 2 * m)) continue;
    const d = x[i + 2 * m] - 2 * x[i + m] + x[i];
    so += d * d;
    co++;
  }
  let sm = 0;
  let cm = 0;
  for (let j = 0; j + 3 * m <= N; j++) {
    if (!clean(j, j + 3 * m - 1)) continue;
    let inner = 0;
    for (let i = j; i < j + m; i++) inner += x[i + 2 * m] - 2 * x[i + m] + x[i];
    sm += inner * inner;
    cm++;
  }
  return { oavar: so / (2 * m * m * co), mvar: sm / (2 * m ** 4 * cm) };
}

describe('stability: NIST SP 1065 test data', () => {
  it('1000-point set: ADEV, OADEV, MDEV, TDEV at τ = 1, 10, 100 s (NIST SP 1065 p. 107–108)', () => {
    const y = nbs1000();
    expect(y[0]).toBeCloseTo(0.57489047, 8);
    const points = stabilityAnalysis({ y, tau0Seconds: 1, ms: [1, 10, 100] });
    const table: Record<number, { adev: number; oadev: number; mdev: number; tdev: number }> = {
      1: { adev: 2.922319e-1, oadev: 2.922319e-1, mdev: 2.922319e-1, tdev: 1.687202e-1 },
      10: { adev: 9.965736e-2, oadev: 9.159953e-2, mdev: 6.172376e-2, tdev: 3.563623e-1 },
      100: { adev: 3.897804e-2, oadev: 3.241343e-2, mdev: 2.170921e-2, tdev: 1.253382 },
    };
    for (const m of [1, 10, 100]) {
      const p = at(points, m);
      const t = table[m];
      expect(rel(p.adevNonOverlapping, t.adev)).toBeLessThan(1e-6);
      expect(rel(p.adev, t.oadev)).toBeLessThan(1e-6);
      expect(rel(p.mdev, t.mdev)).toBeLessThan(1e-6);
      expect(rel(p.tdev, t.tdev)).toBeLessThan(1e-6);
    }
  });

  it('9-point frequency set: τ = 1, 2 (NIST SP 1065 p. 107)', () => {
    const y = Float64Array.from([892, 809, 823, 798, 671, 644, 883, 903, 677]);
    const points = stabilityAnalysis({ y, tau0Seconds: 1, ms: [1, 2] });
    expect(rel(at(points, 1).adev, 91.22945)).toBeLessThan(1e-6);
    expect(rel(at(points, 2).adevNonOverlapping, 115.8082)).toBeLessThan(1e-6);
    expect(rel(at(points, 2).adev, 85.95287)).toBeLessThan(1e-6);
    expect(rel(at(points, 2).mdev, 74.78849)).toBeLessThan(1e-6);
    expect(rel(at(points, 1).tdev, 52.67135)).toBeLessThan(1e-6);
    expect(rel(at(points, 2).tdev, 86.35831)).toBeLessThan(1e-6);
  });

  it('the same set given as 10 phase points (published to 5 decimals) gives the same deviations', () => {
    const x = Float64Array.from([0, 103.11111, 123.22222, 157.33333, 166.44444, 48.55555, -96.33333, -2.22222, 111.88889, 0]);
    const points = stabilityAnalysis({ x, tau0Seconds: 1, ms: [1, 2] });
    expect(rel(at(points, 1).adev, 91.22945)).toBeLessThan(1e-6);
    expect(rel(at(points, 2).mdev, 74.78849)).toBeLessThan(1e-6);
  });
});

describe('stability: white noise and noise identification', () => {
  it('white FM: ADEV ∝ τ^−1/2 with σ_y(τ) = σ/√m (SP 1065 §5.2 / Table 3 power law)', () => {
    const y = whiteFm(200_000, 7);
    const points = stabilityAnalysis({ y, tau0Seconds: 2 });
    for (const p of points.filter((q) => q.m <= 256)) {
      expect(rel(p.adev, 1 / Math.sqrt(p.m))).toBeLessThan(0.1);
      expect(p.tauSeconds).toBe(2 * p.m);
      expect(p.noiseType).toBe('WFM');
      expect(p.adevLow!).toBeLessThan(p.adev!);
      expect(p.adevHigh!).toBeGreaterThan(p.adev!);
    }
    // MDEV for white FM: Mod σ²/σ² → 0.5 at large m (SP 1065 §5.2.5, R(n) = 0.5 for WFM) [from memory for the table].
    expect(at(points, 256).mdev! / at(points, 256).adev!).toBeCloseTo(Math.SQRT1_2, 1);
  });

  it('identifies white PM and random-walk FM from the lag-1 ACF (Riley & Greenhall 2004)', () => {
    const g = gaussian(11);
    const wpm = Float64Array.from({ length: 20_001 }, () => g());
    const yWpm = phaseToFrequency(wpm, 1).y;
    const rw = new Float64Array(20_000);
    for (let i = 1; i < rw.length; i++) rw[i] = rw[i - 1] + g();
    const a = stabilityAnalysis({ y: yWpm, tau0Seconds: 1, ms: [1, 4, 16] });
    const b = stabilityAnalysis({ y: rw, tau0Seconds: 1, ms: [1, 4, 16] });
    for (const p of a) expect(p.noiseType).toBe('WPM');
    for (const p of b) expect(p.noiseType).toBe('RWFM');
  });

  it('identifies flicker FM and flicker PM at τ0 (Riley & Greenhall 2004; flicker is the borderline case, so only m = 1)', () => {
    for (const seed of [1, 2, 3]) {
      const f = flicker(6000, seed);
      expect(stabilityAnalysis({ y: f, tau0Seconds: 1, ms: [1] })[0].noiseType).toBe('FFM');
      expect(stabilityAnalysis({ y: phaseToFrequency(f, 1).y, tau0Seconds: 1, ms: [1] })[0].noiseType).toBe('FPM');
    }
  });

  it('±1σ confidence intervals from the WFM EDF cover the true ADEV about 68 % of the time (SP 1065 §5.3)', () => {
    let covered = 0;
    const trials = 300;
    for (let t = 0; t < trials; t++) {
      const p = stabilityAnalysis({ y: whiteFm(1000, 1000 + t), tau0Seconds: 1, ms: [8] })[0];
      const truth = 1 / Math.sqrt(8);
      if (p.adevLow! <= truth && truth <= p.adevHigh!) covered++;
    }
    expect(covered / trials).toBeGreaterThan(0.6);
    expect(covered / trials).toBeLessThan(0.77);
  });
});

describe('stability: gaps and dead time', () => {
  it('matches the direct SP 1065 formulas with every term spanning a gap skipped, whatever the gap holds', () => {
    const y = whiteFm(3000, 3);
    const valid = new Uint8Array(3000).fill(1);
    for (let i = 1000; i < 1100; i++) valid[i] = 0;
    valid[2500] = 0;
    const garbage = Float64Array.from(y);
    for (let i = 0; i < 3000; i++) if (!valid[i]) garbage[i] = 1e3; // far off, but small enough to keep the brute force's phase well conditioned
    expect(Number.isNaN(frequencyToPhase(garbage, 1, valid)[1001])).toBe(true);
    const x = frequencyToPhase(garbage, 1);
    const badIncrement = valid.map((v) => 1 - v);
    const points = stabilityAnalysis({ y: garbage, tau0Seconds: 1, valid, ms: [1, 3, 16, 50] });
    for (const p of points) {
      const direct = bruteForce(x, badIncrement, p.m);
      expect(rel(p.adev, Math.sqrt(direct.oavar))).toBeLessThan(1e-9);
      expect(rel(p.mdev, Math.sqrt(direct.mvar))).toBeLessThan(1e-9);
      // Terms touching the gap are skipped: 3000 − 2m + 1 windows minus those overlapping 100 + 1 bad samples.
      const expectedTerms = 3000 - 2 * p.m + 1 - (100 + 2 * p.m - 1) - (1 + 2 * p.m - 1);
      expect(p.n).toBe(expectedTerms);
    }
  });

  it('places time-stamped samples on a grid; missing epochs become gaps', () => {
    const tau0 = 1;
    const start = 60_000.5;
    const epochs: number[] = [];
    const values: number[] = [];
    for (let i = 0; i < 20; i++) {
      if (i === 5 || i === 6) continue; // dead time
      epochs.push(start + (i * tau0) / 86_400);
      values.push(i);
    }
    const valid = new Uint8Array(values.length).fill(1);
    valid[10] = 0;
    const grid = gridFromEpochs(Float64Array.from(epochs), Float64Array.from(values), valid);
    expect(grid.tau0Seconds).toBeCloseTo(1, 6);
    expect(grid.y.length).toBe(20);
    expect(grid.missingEpochs).toBe(2);
    expect(grid.invalidSamples).toBe(1);
    expect(Array.from(grid.valid.slice(4, 8))).toEqual([1, 0, 0, 1]);
    expect(grid.valid[12]).toBe(0);
    expect(() => gridFromEpochs(Float64Array.from([start, start]), Float64Array.from([1, 2]), undefined, 1)).toThrow();
  });

  it('phase and frequency conversions round-trip on unbroken data (SP 1065 §3.4: x_{i+1} = x_i + y_i τ0)', () => {
    const y = whiteFm(100, 5);
    const back = phaseToFrequency(frequencyToPhase(y, 0.5), 0.5);
    for (let i = 0; i < y.length; i++) expect(back.y[i]).toBeCloseTo(y[i], 12);
    expect(back.valid.every((v) => v === 1)).toBe(true);
  });
});

describe('mean with statistical uncertainty', () => {
  it('white FM: the uncertainty of the mean is σ/√N (common practice: standard error of a white-noise mean)', () => {
    const N = 50_000;
    const y = whiteFm(N, 21).map((v) => 3e-16 + 1e-15 * v);
    const result = meanWithStatisticalUncertainty({ y, tau0Seconds: 1 });
    const expected = 1e-15 / Math.sqrt(N);
    expect(result.statisticalUncertainty! / expected).toBeGreaterThan(0.7);
    expect(result.statisticalUncertainty! / expected).toBeLessThan(1.3);
    let sum = 0;
    for (const v of y) sum += v;
    expect(result.mean).toBeCloseTo(sum / N, 30);
    expect(Math.abs(result.mean - 3e-16)).toBeLessThan(4 * expected);
    expect(result.method).toContain('white FM fitted over');
  });

  it('skips invalid samples and uses the valid time only', () => {
    const y = Float64Array.from([1, 2, 3, 1000, 5, 6, 7, 8, 9, 10, 11, 12]);
    const valid = Uint8Array.from([1, 1, 1, 0, 1, 1, 1, 1, 1, 1, 1, 1]);
    const r = meanWithStatisticalUncertainty({ y, tau0Seconds: 10, valid });
    expect(r.mean).toBeCloseTo(74 / 11, 12);
    expect(r.totalAveragingTimeSeconds).toBe(110);
    expect(r.validSamples).toBe(11);
  });
});

describe('gridFromEpochs with rounded epochs', () => {
  it('infers τ0 without bias when epochs are written as MJD with 9 decimals (≈ 86 µs steps)', () => {
    // Common practice in lab files; a single rounded spacing is off by up to 86 µs, which over 2e5 slots would exceed τ0/4.
    const n = 200_000;
    const epochs = Float64Array.from({ length: n }, (_, i) => Number((61_416 + (i + 0.5) / 86_400).toFixed(9)));
    const grid = gridFromEpochs(epochs, new Float64Array(n));
    expect(Math.abs(grid.tau0Seconds - 1)).toBeLessThan(1e-8);
    expect(grid.missingEpochs).toBe(0);
    expect(grid.y.length).toBe(n);
  });

  it('snaps τ0 to the whole microsecond when the rounded epochs are regular (so τ reads 5120 s, not 5119.99995 s)', () => {
    // Common practice: a 10 s grid written as MJD with 9 decimals; the mean spacing is 10 s within ~1e-8 relative.
    const n = 5_000;
    const epochs = Float64Array.from({ length: n }, (_, i) => Number((61_416.123456789 + (10 * i) / 86_400).toFixed(9)));
    const grid = gridFromEpochs(epochs, new Float64Array(n));
    expect(grid.tau0Seconds).toBe(10);
    expect(grid.y.length).toBe(n);
  });

  it('does not snap when the rounding would move the last epoch off its slot (long run, τ0 off by 4e-7 relative)', () => {
    // Common practice: the grid must keep every epoch on its own slot; 2e5 slots × 4e-7 = 0.08 slot of drift.
    const tau0 = 1.0000004;
    const n = 200_000;
    const epochs = Float64Array.from({ length: n }, (_, i) => 61_416 + (i * tau0) / 86_400);
    expect(gridFromEpochs(epochs, new Float64Array(n)).tau0Seconds).toBeCloseTo(tau0, 9);
  });
});

describe('kthSmallest (the median spacing of the τ0 grid)', () => {
  it('equals the k-th element of the sorted array (reference: the language\'s own sort, ECMA-262 %TypedArray%.prototype.sort)', () => {
    let seed = 12345;
    const rnd = () => ((seed = (seed * 1103515245 + 12345) % 2147483648) / 2147483648);
    for (const [len, distinct] of [[1, 1], [2, 2], [7, 3], [1000, 1], [1000, 5], [5001, 5001], [20_000, 40]] as const) {
      const a = Float64Array.from({ length: len }, () => Math.floor(rnd() * distinct) * 0.5 - 3);
      const sorted = Float64Array.from(a).sort();
      for (const k of new Set([0, len - 1, Math.floor((len - 1) / 2), Math.floor(rnd() * len)])) {
        expect(kthSmallest(Float64Array.from(a), k)).toBe(sorted[k]);
      }
    }
    // Already sorted and reversed inputs.
    const up = Float64Array.from({ length: 10_001 }, (_, i) => i);
    expect(kthSmallest(Float64Array.from(up), 5000)).toBe(5000);
    expect(kthSmallest(Float64Array.from(up).reverse(), 17)).toBe(17);
    expect(() => kthSmallest(new Float64Array(3), 3)).toThrow(RangeError);
  });
});

describe('deviations of a gapped record, against the definitions term by term', () => {
  // Overlapping ADEV, MDEV and overlapping HDEV written straight from their definitions in phase
  // (NIST SP 1065, 2008, §5.2.4, §5.2.5 and §5.2.9 — section numbers from memory), each term used only when every
  // frequency sample it spans is valid; the analysis's one-sweep-per-run sums must give the same values and counts.
  it('agrees with the direct sums over random gaps', () => {
    let seed = 99;
    const rnd = () => (seed = (seed * 16807) % 2147483647) / 2147483647;
    for (let trial = 0; trial < 6; trial++) {
      const n = 700 + Math.floor(rnd() * 900);
      const y = Float64Array.from({ length: n }, () => rnd() - 0.5);
      const valid = new Uint8Array(n).fill(1);
      for (let g = 0; g < 3 + trial * 4; g++) {
        const at = Math.floor(rnd() * n);
        for (let k = at; k < Math.min(n, at + 1 + Math.floor(rnd() * 25)); k++) valid[k] = 0;
      }
      const x = new Float64Array(n + 1);
      for (let k = 0; k < n; k++) x[k + 1] = x[k] + (valid[k] ? y[k] : 0);
      const clean = (from: number, count: number) => {
        for (let k = from; k < from + count; k++) if (!valid[k]) return false;
        return true;
      };
      for (const p of stabilityAnalysis({ y, valid, tau0Seconds: 1 })) {
        const m = p.m;
        let sO = 0, cO = 0, sM = 0, cM = 0, sH = 0, cH = 0;
        for (let i = 0; i + 2 * m <= n; i++) {
          if (!clean(i, 2 * m)) continue;
          sO += (x[i + 2 * m] - 2 * x[i + m] + x[i]) ** 2;
          cO++;
        }
        for (let j = 0; j + 3 * m - 1 <= n; j++) {
          if (!clean(j, 3 * m - 1)) continue;
          let inner = 0;
          for (let i = j; i < j + m; i++) inner += x[i + 2 * m] - 2 * x[i + m] + x[i];
          sM += inner ** 2;
          cM++;
        }
        for (let i = 0; i + 3 * m <= n; i++) {
          if (!clean(i, 3 * m)) continue;
          sH += (x[i + 3 * m] - 3 * x[i + 2 * m] + 3 * x[i + m] - x[i]) ** 2;
          cH++;
        }
        expect(p.n).toBe(cO);
        expect(p.nMdev).toBe(cM);
        expect(p.nHdev).toBe(cH);
        if (cO > 0) expect(p.adev! / Math.sqrt(sO / (2 * m * m * cO))).toBeCloseTo(1, 10);
        if (cM > 0) expect(p.mdev! / Math.sqrt(sM / (2 * m ** 4 * cM))).toBeCloseTo(1, 10);
        if (cH > 0) expect(p.hdev! / Math.sqrt(sH / (6 * m * m * cH))).toBeCloseTo(1, 10);
      }
    }
  });
});
