import { describe, expect, it } from 'vitest';
import {
  FLICKER_FM_MEAN_FACTOR, estimateLinearDrift, fitLinearDrift, meanWithStatisticalUncertainty, stabilityAnalysis, type StabilityPoint,
} from '../../../server/science/stability';
import { formatForUncertainty } from '../../../shared/number-text';
import { meanWithStatisticalUncertainty as legacyMean } from '../../helpers/legacy-stability';
import { gaussianFrom, powerLawFrequencyNoise, uniformRng } from '../../helpers/power-law-noise';

/** NBS/NIST 1000-point data set (NIST SP 1065 test suite, pp. 107–108: Park–Miller generator, n₀ = 1 234 567 890). */
function nbs1000(): Float64Array {
  const y = new Float64Array(1000);
  let n = 1_234_567_890;
  for (let i = 0; i < 1000; i++) {
    y[i] = n / 2_147_483_647;
    n = (16_807 * n) % 2_147_483_647;
  }
  return y;
}

function at(points: StabilityPoint[], m: number): StabilityPoint {
  const p = points.find((q) => q.m === m);
  if (!p) throw new Error(`no point for m=${m}`);
  return p;
}

const rel = (actual: number | null, expected: number): number => Math.abs((actual as number) / expected - 1);

describe('Hadamard and total deviation against the NIST SP 1065 test data (pp. 107–108)', () => {
  it('1000-point set: OHDEV and TOTDEV at τ = 10, 100 s', () => {
    const points = stabilityAnalysis({ y: nbs1000(), tau0Seconds: 1, ms: [1, 10, 100] });
    // SP 1065 1000-point table: OHDEV 2.943883e-01 / 9.581083e-02 / 3.237638e-02; TOTDEV 2.922319e-01 / 9.134743e-02 / 3.406530e-02.
    expect(rel(at(points, 1).hdev, 2.943883e-1)).toBeLessThan(1e-6);
    expect(rel(at(points, 10).hdev, 9.581083e-2)).toBeLessThan(1e-6);
    expect(rel(at(points, 100).hdev, 3.237638e-2)).toBeLessThan(1e-6);
    expect(rel(at(points, 1).totdev, 2.922319e-1)).toBeLessThan(1e-6);
    expect(rel(at(points, 10).totdev, 9.134743e-2)).toBeLessThan(1e-6);
    expect(rel(at(points, 100).totdev, 3.40653e-2)).toBeLessThan(1e-6);
  });

  it('9-point frequency set: OHDEV 70.80607 / 85.61487 and TOTDEV 91.22945 / 93.90379 at τ = 1, 2 s', () => {
    const y = Float64Array.from([892, 809, 823, 798, 671, 644, 883, 903, 677]);
    const points = stabilityAnalysis({ y, tau0Seconds: 1, ms: [1, 2] });
    expect(rel(at(points, 1).hdev, 70.80607)).toBeLessThan(1e-6);
    expect(rel(at(points, 2).hdev, 85.61487)).toBeLessThan(1e-6);
    expect(rel(at(points, 1).totdev, 91.22945)).toBeLessThan(1e-6);
    expect(rel(at(points, 2).totdev, 93.90379)).toBeLessThan(1e-6);
  });

  it('gives intervals for MDEV, TDEV and HDEV that bracket the estimate; TDEV’s is MDEV’s scaled by τ/√3 (SP 1065 §5.2.6)', () => {
    const points = stabilityAnalysis({ y: nbs1000(), tau0Seconds: 1 });
    for (const p of points) {
      expect(p.mdevLow!).toBeLessThan(p.mdev!);
      expect(p.mdevHigh!).toBeGreaterThan(p.mdev!);
      expect(p.hdevLow!).toBeLessThan(p.hdev!);
      expect(p.hdevHigh!).toBeGreaterThan(p.hdev!);
      expect(p.tdevLow! / p.mdevLow!).toBeCloseTo(p.tauSeconds / Math.sqrt(3), 9);
    }
  });

  it('total deviation is null for records with gaps (the reflection needs an unbroken record)', () => {
    const y = nbs1000();
    const valid = new Uint8Array(1000).fill(1);
    valid[500] = 0;
    expect(stabilityAnalysis({ y, valid, tau0Seconds: 1, ms: [10] })[0].totdev).toBeNull();
  });
});

describe('noise identification at each τ (SP 1065 §5.6)', () => {
  it('identifies random-walk FM with B1 where fewer than 30 averages remain, instead of carrying the type over', () => {
    const next = gaussianFrom(uniformRng(5));
    let rw = 0;
    let viaB1 = 0;
    const trials = 40;
    for (let r = 0; r < trials; r++) {
      const y = powerLawFrequencyNoise(4096, 2, next);
      const p = at(stabilityAnalysis({ y, tau0Seconds: 1 }), 256); // 16 averages
      if (p.noiseMethod === 'b1') viaB1++;
      if (p.noiseType === 'RWFM') rw++;
    }
    expect(viaB1).toBe(trials);
    // A sizeable majority, not all: B1 from 16 averages is a noisy ratio.
    expect(rw / trials).toBeGreaterThan(0.6);
  });
});

describe('statistical uncertainty of the mean by noise type', () => {
  it('random-walk FM: u(ȳ) follows σ_y(T) ∝ √T instead of ADEV at a shorter τ unchanged (the defect before: 2.8–4× low)', () => {
    const next = gaussianFrom(uniformRng(9));
    let ratioNew = 0;
    let ratioOld = 0;
    const trials = 30;
    for (let r = 0; r < trials; r++) {
      const y = powerLawFrequencyNoise(4096, 2, next);
      // For a random walk from rest with unit steps, Var(ȳ) = Σ_k (N − k)²/N² ≈ N/3 (common practice: variance of a sum).
      const truth = Math.sqrt(4096 / 3);
      ratioNew += meanWithStatisticalUncertainty({ y, tau0Seconds: 1 }).statisticalUncertainty! / truth / trials;
      ratioOld += legacyMean({ y, tau0Seconds: 1 }).statisticalUncertainty! / truth / trials;
    }
    expect(ratioNew).toBeGreaterThan(0.75);
    expect(ratioNew).toBeLessThan(2.5);
    expect(ratioOld).toBeLessThan(0.5);
  });

  it('flicker FM from rest: Var(ȳ)/σ²_y = 1/ln 2, from the exact Kasdin–Walter (1992) impulse response', () => {
    // Var(ȳ) = Σ H_k²/N² with H_k = Σ_{i≤k} h_i, h_i = h_{i−1}(i − 1/2)/i; the Allan variance of flicker FM is 2 ln 2·h₋₁
    // (SP 1065 Table 3 power-law relation [from memory]) with h₋₁ = 1/π for unit white input (one-sided S_y ≈ 1/(π f)).
    const N = 16_384;
    let h = 1;
    let H = 0;
    let S = 0;
    for (let k = 0; k < N; k++) {
      if (k > 0) h = (h * (k - 0.5)) / k;
      H += h;
      S += H * H;
    }
    const ratio = S / N / N / ((2 * Math.LN2) / Math.PI);
    expect(ratio).toBeCloseTo(FLICKER_FM_MEAN_FACTOR ** 2, 3);
  });

  it('white FM: u(ȳ) = σ/√N with the white-FM fit and a large EDF', () => {
    const next = gaussianFrom(uniformRng(21));
    const y = Float64Array.from({ length: 20_000 }, () => 1e-15 * next());
    const r = meanWithStatisticalUncertainty({ y, tau0Seconds: 1 });
    expect(r.model).toBe('white-fm');
    expect(r.statisticalUncertainty! / (1e-15 / Math.sqrt(20_000))).toBeGreaterThan(0.9);
    expect(r.statisticalUncertainty! / (1e-15 / Math.sqrt(20_000))).toBeLessThan(1.1);
    expect(r.degreesOfFreedom!).toBeGreaterThan(1000);
  });
});

describe('linear drift and digits', () => {
  it('least-squares drift: slope within 4σ, σ_b = σ·√(12/(N³ − N)) for unit spacing (ordinary least squares, common practice)', () => {
    const next = gaussianFrom(uniformRng(3));
    const N = 5000;
    const y = Float64Array.from({ length: N }, (_, i) => 2e-16 + 1e-20 * i + 1e-16 * next());
    const d = estimateLinearDrift(y, 10);
    expect(d.slopeUncertaintyPerSecond / ((1e-16 * Math.sqrt(12 / (N ** 3 - N))) / 10)).toBeCloseTo(1, 1);
    expect(Math.abs(d.slopePerSecond - 1e-21) / d.slopeUncertaintyPerSecond).toBeLessThan(4);
    let mean = 0;
    for (const v of d.detrended) mean += v / N;
    let raw = 0;
    for (const v of y) raw += v / N;
    expect(mean).toBeCloseTo(raw, 28);
  });

  it('the fit without the detrended copy states the same slope, uncertainty and reference epoch, with gaps too', () => {
    const next = gaussianFrom(uniformRng(4));
    const y = Float64Array.from({ length: 3000 }, (_, i) => -1e-16 + 3e-20 * i + 1e-16 * next());
    const valid = Uint8Array.from({ length: 3000 }, (_, i) => (i % 97 < 5 ? 0 : 1));
    y[1234] = NaN;
    const { detrended, ...full } = estimateLinearDrift(y, 1.5, valid);
    expect(detrended.length).toBe(3000);
    expect(fitLinearDrift(y, 1.5, valid)).toEqual(full);
  });

  it('y is written so that rounding stays below u/10', () => {
    for (const [y, u] of [[1.234567890123e-16, 3.1e-18], [-4.2e-17, 8e-19], [0, 2e-18], [5.5e-13, 1e-17]] as const) {
      const text = formatForUncertainty(y, u);
      expect(Math.abs(Number(text) - y)).toBeLessThanOrEqual(u / 10);
    }
    expect(formatForUncertainty(1.234567890123e-16, 3.1e-18)).toBe('1.235e-16');
  });
});
