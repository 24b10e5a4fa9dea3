import { describe, expect, it } from 'vitest';
import { calibrationChain, correlatedCombinedUncertainty, transportFromDifference, type ChainComparison } from '../../../server/science/calibration-chain';
import { studentTQuantile } from '../../../server/science/distributions';

// Hand computations for a transportable clock T (clock B in every comparison) against a reference clock R (clock A).
// Published relations used: the first-order redshift y = ΔC/c² (Mehlstäubler et al. 2018, Rep. Prog. Phys. 81:064401,
// eq. 1); c² = 89 875 517 873 681 764 m²/s² exactly (SI Brochure 9th ed., Table 1); the law of propagation for correlated
// inputs (JCGM 100:2008 §5.2.2 eq. 13), Welch–Satterthwaite (JCGM 100:2008 G.4.1 eq. G.2b), the rectangular distribution
// (JCGM 100:2008 §4.3.7), k = t_p(ν_eff) (JCGM 100:2008 G.3); E_n = d/U (ISO 13528:2015 §9.7).

const C2 = 299_792_458 ** 2; // c = 299 792 458 m/s exactly (SI Brochure 9th ed., Table 1)
const uT = 5e-18; // T's budget version (same version in all three comparisons)
const uR = 3e-18; // R's budget version
const uLink = 1e-19;
const uTie = 0.02; // m²/s², local tie at the calibration site (same tie before and after)

function cmp(id: string, y: number, uStat: number, dofStat: number, tie: boolean, transportableIs: 'A' | 'B' = 'B'): ChainComparison {
  const sT = transportableIs === 'B' ? 1 : -1;
  return {
    id, name: id, y, transportableIs,
    terms: [
      { key: null, label: 'statistical', type: 'A', standardUncertainty: uStat, sensitivity: 1, unit: '1', degreesOfFreedom: dofStat },
      { key: 'budget:T', label: 'T budget', type: 'B', standardUncertainty: uT, sensitivity: sT, unit: '1' },
      { key: 'budget:R', label: 'R budget', type: 'B', standardUncertainty: uR, sensitivity: -sT, unit: '1' },
      ...(tie ? [] : [{ key: 'link:L', label: 'fibre link', type: 'B' as const, standardUncertainty: uLink, sensitivity: 1, unit: '1' }]),
    ],
    localTie: tie ? { deltaC_m2s2: 0.5, standardUncertainty_m2s2: uTie, key: 'tie:S', source: 'levelling' } : null,
  };
}

describe('calibration chain (hand computation)', () => {
  const remote = cmp('remote', 1.1e-13, 2e-18, 10, false);
  const before = cmp('before', 1.2e-17, 1e-18, 20, true);
  const after = cmp('after', 1.5e-17, 1e-18, 20, true);

  it('gives ΔC = c²·(y_r − ȳ_s) with equal weights, T and R cancelling exactly', () => {
    const r = calibrationChain({ remote, before, after });
    // Offsets o = y − L/c² (JCGM-free arithmetic): equal unshared variances ⇒ w = ½ each.
    const oB = 1.2e-17 - 0.5 / C2;
    const oA = 1.5e-17 - 0.5 / C2;
    const ys = (oB + oA) / 2;
    expect(r.calibrations.map((c) => c.weight)).toEqual([0.5, 0.5]);
    expect(r.ySideBySide).toBeCloseTo(ys, 30);
    expect(r.deltaC_m2s2).toBeCloseTo(C2 * (1.1e-13 - ys), 9);
    // T's systematic: sensitivities c²·(+1) − ½c² − ½c² = 0 exactly; likewise R's (−1 + ½ + ½).
    const t = r.lines.find((l) => l.key === 'budget:T')!;
    const rr = r.lines.find((l) => l.key === 'budget:R')!;
    expect(t.sensitivity_m2s2).toBe(0);
    expect(t.contribution_m2s2).toBe(0);
    expect(t.cancels).toBe(true);
    expect(rr.contribution_m2s2).toBe(0);
    // Transport from the difference d = o_A − o_B = 3e-18: u = |d|/(2√3) (JCGM 100:2008 §4.3.7).
    const uTr = 3e-18 / (2 * Math.sqrt(3));
    expect(r.transport.origin).toBe('before-after');
    expect(r.transport.standardUncertainty).toBeCloseTo(uTr, 30);
    // u_c² = (c²·2e-18)² + (½c²·1e-18)²·2 + (c²·1e-19)² + (½·0.02)²·... the tie: ½ + ½ = 1 times 0.02 (same tie) + (c²·u_tr)².
    const parts = [C2 * 2e-18, 0.5 * C2 * 1e-18, 0.5 * C2 * 1e-18, C2 * uLink, 1 * uTie, C2 * uTr];
    const uc = Math.sqrt(parts.reduce((s, x) => s + x * x, 0));
    expect(r.standardUncertainty_m2s2 / uc).toBeCloseTo(1, 12);
    // Welch–Satterthwaite, JCGM 100:2008 eq. G.2b: ν_eff = u_c⁴ / Σ u_i⁴/ν_i (statistical ν 10, 20, 20; transport ν 2).
    const nu = uc ** 4 / (parts[0] ** 4 / 10 + parts[1] ** 4 / 20 + parts[2] ** 4 / 20 + parts[5] ** 4 / 2);
    expect(r.effectiveDegreesOfFreedom).toBeCloseTo(nu, 6);
    // k = t_p(⌊ν_eff⌋) for p = 95.45 % (JCGM 100:2008 G.3, G.4.1 note 1).
    expect(r.coverageFactor).toBeCloseTo(studentTQuantile((1 + 0.9544997361036416) / 2, Math.floor(nu)), 10);
    expect(r.expandedUncertainty_m2s2 / (r.coverageFactor * uc)).toBeCloseTo(1, 12);
  });

  it('reports the before/after difference with its own E_n (shared inputs cancel in d)', () => {
    const r = calibrationChain({ remote, before, after });
    // d = 3e-18; u(d) = √(1e-18² + 1e-18²) (the tie and both budgets are shared); E_n = d/(2u) (ISO 13528:2015 §9.7).
    const ud = Math.hypot(1e-18, 1e-18);
    expect(r.beforeAfter!.difference).toBeCloseTo(3e-18, 30);
    expect(r.beforeAfter!.standardUncertainty).toBeCloseTo(ud, 30);
    expect(r.beforeAfter!.en).toBeCloseTo(3e-18 / (2 * ud), 10);
    expect(r.beforeAfter!.agreed).toBe(false);
  });

  it('T’s systematic cancels exactly: changing u(T) or T’s offset changes nothing', () => {
    const big = (c: ChainComparison, bump: number): ChainComparison => ({
      ...c, y: c.y + bump, terms: c.terms.map((t) => (t.key === 'budget:T' ? { ...t, standardUncertainty: 1e-15 } : t)),
    });
    const a = calibrationChain({ remote, before, after });
    // A common shift of T's frequency by 4e-17 moves all three y alike.
    const b = calibrationChain({ remote: big(remote, 4e-17), before: big(before, 4e-17), after: big(after, 4e-17) });
    // T's line: sensitivity exactly 0, so even u(T) = 1e-15 contributes exactly nothing.
    const t = b.lines.find((l) => l.key === 'budget:T')!;
    expect(t.sensitivity_m2s2).toBe(0);
    expect(t.contribution_m2s2).toBe(0);
    // The rest agrees to rounding of the shifted y (d = o_after − o_before is recomputed from shifted values).
    expect(b.standardUncertainty_m2s2 / a.standardUncertainty_m2s2).toBeCloseTo(1, 12);
    expect(b.deltaC_m2s2).toBeCloseTo(a.deltaC_m2s2, 9);
  });

  it('grouping equals JCGM 100:2008 eq. (13) with r = +1 between the appearances of the same quantity', () => {
    // One calibration (after only), entered transport term, T as clock A in the remote comparison (sign −1).
    const rem = cmp('remote', -1.1e-13, 2e-18, 10, false, 'A');
    const r = calibrationChain({ remote: rem, after, transportReproducibility: { standardUncertainty: 1e-18, source: 'lab study' } });
    // Inputs as separate rows: remote stat, remote T, remote R, link, after stat, after T, after R, tie, transport.
    const c = [C2 * -1, C2 * -1 * -1, C2 * -1 * 1, C2 * -1, -C2, -C2, C2, 1, C2];
    const u = [2e-18, uT, uR, uLink, 1e-18, uT, uR, uTie, 1e-18];
    const same = new Map([['1,5', 1], ['5,1', 1], ['2,6', 1], ['6,2', 1]]);
    const u13 = correlatedCombinedUncertainty(c, u, (i, j) => same.get(`${i},${j}`) ?? 0);
    expect(r.standardUncertainty_m2s2 / u13).toBeCloseTo(1, 12);
    expect(r.deltaC_m2s2).toBeCloseTo(C2 * (1.1e-13 - (1.5e-17 - 0.5 / C2)), 9);
    expect(r.transport.origin).toBe('entered');
    expect(r.beforeAfter).toBeNull();
  });

  it('the transport term enters: u_c² grows by (c²·u_tr)²', () => {
    const without = calibrationChain({ remote, after, transportReproducibility: { standardUncertainty: 0, source: 'none' } });
    const withTr = calibrationChain({ remote, after, transportReproducibility: { standardUncertainty: 2e-18, source: 'lab study' } });
    expect(withTr.standardUncertainty_m2s2 ** 2 - without.standardUncertainty_m2s2 ** 2).toBeCloseTo((C2 * 2e-18) ** 2, 3);
    expect(withTr.lines.find((l) => l.key === 'transport')!.contribution_m2s2).toBeCloseTo(C2 * 2e-18, 12);
    expect(withTr.deltaC_m2s2).toBe(without.deltaC_m2s2);
  });

  it('refuses one calibration without an entered transport term', () => {
    expect(() => calibrationChain({ remote, before })).toThrow(/transport reproducibility must be entered/);
  });

  it('inverse-variance weights from the unshared parts', () => {
    const noisyAfter = cmp('after', 1.5e-17, 3e-18, 20, true);
    const r = calibrationChain({ remote, before, after: noisyAfter });
    // w_b = u_a²/(u_a² + u_b²) = 9/10.
    expect(r.calibrations[0].weight).toBeCloseTo(0.9, 12);
    expect(r.lines.find((l) => l.key === 'budget:T')!.contribution_m2s2).toBe(0);
  });

  it('rectangular transport term: |d|/(2√3)', () => {
    // JCGM 100:2008 §4.3.7: half-width a, u = a/√3.
    expect(transportFromDifference(-6e-18)).toBeCloseTo(3e-18 / Math.sqrt(3), 30);
  });

  it('covariance with the remote comparison: Σ c_i·c′_i·u_i²', () => {
    const r = calibrationChain({ remote, before, after });
    // Shared with the remote ΔC = c²·y_r: its statistical part (c²·c²·u²), its link, T and R (chain sensitivities 0).
    const cov = C2 * C2 * 2e-18 ** 2 + C2 * C2 * uLink ** 2;
    expect(r.covariances[0].covariance_m4s4 / cov).toBeCloseTo(1, 10);
  });
});
