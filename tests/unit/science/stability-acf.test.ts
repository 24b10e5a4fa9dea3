import { describe, expect, it } from 'vitest';
import { identifyNoiseAcf, prepareFrequency, type NoiseType } from '../../../server/science/stability';
import { gaussianFrom, powerLawFrequencyNoise, uniformRng } from '../../helpers/power-law-noise';

// Reference after W. J. Riley & C. A. Greenhall, "Power law noise identification using the lag 1 autocorrelation",
// Proc. 18th European Frequency and Time Forum (2004) (also NIST SP 1065 §5.6): the m-averaged frequency series z is
// tested by its lag-1 autocorrelation r1 = Σ (z_i − z̄)(z_{i+1} − z̄) / Σ (z_i − z̄)², δ = r1 / (1 + r1); while
// δ ≥ 0.25 the series is differenced (at most twice), and α = −round(2δ) − 2d for d differences (frequency data).
// Written plainly from the raw samples: each average from its own m samples, a gap (any invalid sample in the block)
// kept as null, products only over adjacent pairs that are both present, arrays rebuilt at every step.
const NOISE_BY_ALPHA: Record<string, NoiseType> = { '2': 'WPM', '1': 'FPM', '0': 'WFM', '-1': 'FFM', '-2': 'RWFM' };

function referenceAcf(y: Float64Array, valid: Uint8Array, m: number): { noise: NoiseType; delta: number; differences: number } | null {
  const blocks = Math.floor(y.length / m);
  if (blocks < 30) return null; // the product's minimum of averaged points
  let z: (number | null)[] = [];
  for (let k = 0; k < blocks; k++) {
    let s = 0;
    let clean = true;
    for (let j = k * m; j < (k + 1) * m; j++) {
      if (valid[j] !== 1) clean = false;
      s += y[j];
    }
    z.push(clean ? s / m : null);
  }
  for (let d = 0; d <= 2; d++) {
    const present = z.filter((v): v is number => v !== null);
    const mean = present.reduce((a, v) => a + v, 0) / present.length;
    let num = 0;
    let pairs = 0;
    for (let i = 0; i + 1 < z.length; i++) {
      const a = z[i];
      const b = z[i + 1];
      if (a !== null && b !== null) {
        num += (a - mean) * (b - mean);
        pairs++;
      }
    }
    const den = present.reduce((a, v) => a + (v - mean) ** 2, 0);
    if (pairs < 29) return null;
    const r1 = den > 0 ? num / den : 0;
    const delta = r1 / (1 + r1);
    if (delta < 0.25 || d === 2) {
      const alpha = Math.max(-2, Math.min(2, -Math.round(2 * delta) - 2 * d));
      return { noise: NOISE_BY_ALPHA[String(alpha)], delta, differences: d };
    }
    z = z.slice(1).map((v, i) => (v !== null && z[i] !== null ? v - (z[i] as number) : null));
  }
  return null;
}

/** A record of power-law frequency noise (β = 0 white FM, 1 flicker FM, 2 random-walk FM, 4 steeper still, which needs two differences) with random gaps. */
function record(n: number, beta: number, seed: number, gapRate: number): { y: Float64Array; valid: Uint8Array } {
  const u = uniformRng(seed);
  const y = beta === 0 ? Float64Array.from({ length: n }, gaussianFrom(u)) : powerLawFrequencyNoise(n, beta, gaussianFrom(u));
  const valid = new Uint8Array(n).fill(1);
  for (let i = 0; i < n; i++) {
    if (u() < gapRate) {
      // a gap of 1 to 20 samples; the value under an invalid flag is garbage the analysis must not use
      const len = 1 + Math.floor(u() * 20);
      for (let j = i; j < Math.min(n, i + len); j++) {
        valid[j] = 0;
        y[j] = u() < 0.5 ? NaN : 1e6 * u();
      }
      i += len;
    }
  }
  return { y, valid };
}

describe('lag-1 autocorrelation noise identification', () => {
  it('agrees with a plain computation of r1 and δ of the m-averaged series on random records with gaps', () => {
    let compared = 0;
    const differencesSeen = new Set<number>();
    for (const [beta, seed] of [[0, 11], [1, 12], [2, 13], [0, 14], [1, 15], [2, 16], [4, 17]]) {
      const { y, valid } = record(8000, beta, seed, 0.002);
      const p = prepareFrequency(y, valid);
      for (const m of [1, 2, 3, 5, 8, 16, 33, 64, 150, 200, 250]) {
        const ref = referenceAcf(y, valid, m);
        const got = identifyNoiseAcf(p, m);
        if (ref === null) {
          expect(got).toBeNull();
          continue;
        }
        expect(got).not.toBeNull();
        // the product works from mean-removed prefix sums, the reference from the raw samples: rounding only
        expect(Math.abs(got!.delta - ref.delta)).toBeLessThan(1e-9);
        expect(got!.differences).toBe(ref.differences);
        expect(got!.noise).toBe(ref.noise);
        expect(got!.conclusive).toBe(Math.abs(2 * ref.delta - Math.round(2 * ref.delta)) <= 0.3);
        differencesSeen.add(ref.differences);
        compared++;
      }
    }
    expect(compared).toBeGreaterThanOrEqual(40);
    // the records reach every branch: no difference, one and two
    expect([...differencesSeen].sort()).toEqual([0, 1, 2]);
  });

  it('gives the same answer with a reused scratch array holding old values as with its own array', () => {
    const { y, valid } = record(5000, 2, 21, 0.0005);
    const p = prepareFrequency(y, valid);
    const scratch = new Float64Array(p.n + 1).fill(12345.678);
    for (const m of [1, 2, 4, 8, 16, 32, 64, 128, 166, 200]) {
      const own = identifyNoiseAcf(p, m);
      const shared = identifyNoiseAcf(p, m, scratch);
      expect(shared).toEqual(own);
      if (m <= 32) expect(own).not.toBeNull();
    }
    // a scratch array too short for the averages is not used
    const short = new Float64Array(10).fill(Number.NaN);
    expect(identifyNoiseAcf(p, 4, short)).toEqual(identifyNoiseAcf(p, 4));
  });
});
