import DecimalBase from 'decimal.js';
import { describe, expect, it } from 'vitest';
import { computeClosure, findClosureLoops, fundamentalCycles, type ClosureClock, type ClosureLegInput } from '../../../server/science/ratio-closure';
import { ScienceInputError } from '../../../server/science/errors';

// Closures of frequency ratios around a loop of clocks. Expected values are hand computations from the published
// formulas named beside each check: JCGM 100:2008 (GUM) eq. (10) for u_c, §6.2.1 for U = k·u_c, ISO 13528:2015 §9.7
// for E_n (clause number from memory), and the cycle-space dimension m − n + c of a graph (Diestel, Graph Theory,
// 5th ed. 2017, §1.9; from memory). All clocks, sites and numbers are invented.

const siteA = { id: 'site-a', latitudeDeg: 47.1, longitudeDeg: 8.2, ellipsoidalHeightM: 400 };
const siteB = { id: 'site-b', latitudeDeg: 46.3, longitudeDeg: 9.9, ellipsoidalHeightM: 1800 };
const clock = (id: string, site: typeof siteA, budgetId: string, version: number, u: number): ClosureClock => ({ id, name: id, site, budget: { id: budgetId, version, totalUncertainty: u } });
const A = clock('A', siteA, 'bA1', 1, 1.0e-18);
const B = clock('B', siteB, 'bB1', 1, 1.2e-18);
const C1 = clock('C', siteB, 'bC1', 1, 2.0e-18);
const C2 = clock('C', siteB, 'bC2', 2, 1.5e-18);
const R0_YB_SR = '1.2075070393433378482'; // invented value of a Yb⁺/Sr-like reference ratio

const Decimal = DecimalBase.clone({ precision: 50 });
const N = 400;
const START = 61_000.25;
const epochs = Float64Array.from({ length: N }, (_, i) => START + (i * 10) / 86_400);
function noise(seed: number, sigma: number): Float64Array {
  let s = seed;
  return Float64Array.from({ length: N }, () => {
    s = (s * 16807) % 2147483647;
    return sigma * (s / 2147483647 - 0.5);
  });
}
const allValid = new Uint8Array(N).fill(1);

/** Loop A→B (c1), B→C (c2), C→A run backwards over c3 = A→C; z = y1 + y2 − y3 = ε0 at every sample. */
function loop(epsilon0: number, r0Third = R0_YB_SR): ClosureLegInput[] {
  const n = noise(7, 4e-16);
  const m = noise(11, 3e-16);
  const a = 2.1e-14;
  const b = -0.7e-14;
  const leg = (campaignId: string, sign: 1 | -1, clockA: ClosureClock, clockB: ClosureClock, linkU: number, r0: string, y: (i: number) => number): ClosureLegInput => ({
    campaignId, campaignName: campaignId, sign, clockA, clockB, link: { id: `link-${campaignId}`, name: `L-${campaignId}`, fractionalUncertainty: linkU },
    referenceRatio: { value: r0, source: 'invented' }, epochMjd: epochs, y: Float64Array.from({ length: N }, (_, i) => y(i)), valid: allValid,
  });
  return [
    leg('c1', 1, A, B, 3e-19, '1', (i) => a + n[i]),
    leg('c2', 1, B, C1, 1e-20, R0_YB_SR, (i) => b - n[i] + m[i]),
    leg('c3', -1, A, C2, 3e-19, r0Third, (i) => a + b + m[i] - epsilon0),
  ];
}
const period = { commonStartMjd: START, commonEndMjd: START + (N * 10) / 86_400 };

// u_c² = Σ (c_i·u(x_i))² (JCGM 100:2008 eq. 10): A and B cancel (c = 0, same budget version in two legs with opposite
// signs), C enters with two budget versions (c = ±1: 2.0e-18 and 1.5e-18), three links 3e-19, 1e-20, 3e-19.
const U_C = Math.sqrt(0.3 ** 2 + 0.01 ** 2 + 0.3 ** 2 + 2 ** 2 + 1.5 ** 2) * 1e-18; // = 2.535764e-18

describe('closure of a loop of three clocks (mixed species)', () => {
  it('consistent loop: ε = 1e-18, u_c from GUM eq. (10) with the shared clocks cancelling, E_n = 0.197', () => {
    const r = computeClosure(loop(1e-18), period);
    expect(r.commonSamples).toBe(N);
    expect(r.closure).toBeCloseTo(1e-18, 30);
    expect(r.referenceRatioTerm).toBe(0); // the same R0 in both directions: Σ s·ln R0 = 0 exactly
    const line = (name: string) => r.budget.find((l) => l.component.startsWith(name))!;
    expect(line('Clock A').sensitivity).toBe(0);
    expect(line('Clock B').sensitivity).toBe(0);
    expect(r.budget.filter((l) => l.component.startsWith('Clock C')).map((l) => l.sensitivity)).toEqual([1, -1]);
    expect(r.combinedStandardUncertainty / U_C).toBeCloseTo(1, 6);
    expect(r.coverageFactor).toBeCloseTo(2, 3); // ν_eff → ∞: k = 2 (JCGM 100:2008 G.6.6)
    expect(r.expandedUncertainty / (2 * U_C)).toBeCloseTo(1, 3); // U = k·u_c (§6.2.1)
    expect(r.en).toBeCloseTo(0.19718, 3); // E_n = ε/U with X = 0, U_ref = 0 (ISO 13528:2015 §9.7): 1e-18/(2·2.535764e-18)
    expect(r.agreed).toBe(true);
    expect(line('Tide model').sensitivity).toBe(0); // each clock at one site: the tide corrections cancel
  });

  it('inconsistent loop: ε = 2e-17 gives E_n = 3.94 and fails', () => {
    const r = computeClosure(loop(2e-17), period);
    expect(r.closure).toBeCloseTo(2e-17, 29);
    expect(r.en).toBeCloseTo(3.94358, 2); // 2e-17/(2·2.535764e-18), ISO 13528:2015 §9.7
    expect(r.agreed).toBe(false);
  });

  it('reference ratios that do not close enter as Σ s·ln R0 (decimal), here ln(R0₂/R0₃) = −1.490675e-18', () => {
    const r = computeClosure(loop(0, '1.20750703934333785'), period);
    // ln(1.2075070393433378482) − ln(1.20750703934333785), computed with Python's decimal module at 50 digits.
    expect(r.referenceRatioTerm).toBeCloseTo(-1.49067453965227e-18, 30);
    expect(r.closure).toBeCloseTo(-1.49067453965227e-18, 29);
  });

  it('equals ln of the product of the measured ratios Π R_i^{s_i}, R = R0·(1 + y) (first order in y)', () => {
    const r = computeClosure(loop(3e-18, '1.20750703934333785'), period);
    let lnProduct = new Decimal(0);
    for (const leg of r.legs) {
      const R = new Decimal(leg.referenceRatio).times(new Decimal(1).plus(leg.meanY));
      lnProduct = lnProduct.plus(R.ln().times(leg.sign));
    }
    expect(Math.abs(lnProduct.toNumber() - r.closure)).toBeLessThan(1e-27); // ln(1 + y) − y ≈ y²/2 ≈ 2e-28
  });

  it('refuses legs that do not close and campaigns without common time', () => {
    const legs = loop(0);
    expect(() => computeClosure([legs[0], legs[2], legs[1]], period)).toThrow(ScienceInputError);
    expect(() => computeClosure(legs, { commonStartMjd: START + 1, commonEndMjd: START + 1.00001 })).toThrow(ScienceInputError);
  });
});

describe('loop search', () => {
  const e = (id: string, a: string, b: string, start = 0, end = 10) => ({ id, clockA: a, clockB: b, start, end });

  it('finds the triangle once, oriented along its first campaign', () => {
    const loops = findClosureLoops([e('c1', 'A', 'B'), e('c2', 'B', 'C'), e('c3', 'A', 'C')]);
    expect(loops).toHaveLength(1);
    expect(loops[0].key).toBe('c1,c2,c3');
    expect(loops[0].legs).toEqual([{ campaignId: 'c1', sign: 1 }, { campaignId: 'c2', sign: 1 }, { campaignId: 'c3', sign: -1 }]);
    expect(loops[0].clocks).toEqual(['A', 'B', 'C']);
  });

  it('needs overlapping periods: a campaign that ran at another time closes nothing', () => {
    expect(findClosureLoops([e('c1', 'A', 'B', 0, 10), e('c2', 'B', 'C', 0, 10), e('c3', 'A', 'C', 10, 20)])).toHaveLength(0);
    const loops = findClosureLoops([e('c1', 'A', 'B', 0, 10), e('c2', 'B', 'C', 2, 12), e('c3', 'A', 'C', 5, 20)]);
    expect(loops).toHaveLength(1);
    expect([loops[0].commonStart, loops[0].commonEnd]).toEqual([5, 10]);
  });

  it('gives m − n + c fundamental loops (cycle-space dimension, Diestel §1.9): 4 clocks, 5 campaigns → 2; two parallel campaigns → a loop of two', () => {
    const k4minus = [e('c1', 'A', 'B'), e('c2', 'B', 'C'), e('c3', 'C', 'D'), e('c4', 'D', 'A'), e('c5', 'A', 'C')];
    expect(fundamentalCycles(k4minus)).toHaveLength(5 - 4 + 1);
    // Two components: a triangle and a square with a chord → (3 − 3 + 1) + (5 − 4 + 1) = 3.
    const two = [...k4minus, e('d1', 'X', 'Y'), e('d2', 'Y', 'Z'), e('d3', 'Z', 'X')];
    expect(fundamentalCycles(two)).toHaveLength(3);
    const parallel = findClosureLoops([e('c1', 'A', 'B'), e('c2', 'B', 'A')]);
    expect(parallel).toHaveLength(1);
    expect(parallel[0].legs).toEqual([{ campaignId: 'c1', sign: 1 }, { campaignId: 'c2', sign: 1 }]);
  });

  it('every loop it reports is closed and ran at one time', () => {
    const edges = Array.from({ length: 40 }, (_, i) => e(`c${String(i).padStart(2, '0')}`, `K${i % 7}`, `K${(i * 3 + 1) % 7}`, i % 5, (i % 5) + 6));
    for (const l of findClosureLoops(edges)) {
      expect(l.commonEnd).toBeGreaterThan(l.commonStart);
      let at = l.clocks[0];
      for (const leg of l.legs) {
        const c = edges.find((x) => x.id === leg.campaignId)!;
        expect(leg.sign === 1 ? c.clockA : c.clockB).toBe(at);
        at = leg.sign === 1 ? c.clockB : c.clockA;
      }
      expect(at).toBe(l.clocks[0]);
    }
  });
});
