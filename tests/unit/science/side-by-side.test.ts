import { describe, expect, it } from 'vitest';
import { localTieFromBenchmarks, sideBySideOffset } from '../../../server/science/side-by-side';
import { ScienceInputError } from '../../../server/science/errors';

// Hand computations with c = 299 792 458 m/s exact (SI Brochure, 9th ed., Table 1), so c² = 89 875 517 873 681 764 m²/s².
describe('side-by-side offset: y − ΔC_local/c²', () => {
  it('removes the local redshift ΔC/c² (redshift relation y = ΔC/c², IERS Conventions 2010 ch. 10; docs/science.md) and combines u by JCGM 100:2008 eq. 10', () => {
    // Hand computation: ΔC_local = −4.121 m²/s² → y_local = −4.121 / 8.9875517873681764e16 = −4.585 230 9e-17;
    // offset = −1.8e-17 − (−4.585 230 9e-17) = 2.785 230 9e-17;
    // u(y_local) = 0.03 / c² = 3.337 950e-19; u = √((2.0e-18)² + (3.337 950e-19)²) = 2.027 663e-18.
    const o = sideBySideOffset(-1.8e-17, 2.0e-18, { deltaC_m2s2: -4.121, uDeltaC_m2s2: 0.03 });
    expect(o.yLocal).toBeCloseTo(-4.5852309e-17, 23);
    expect(o.offset).toBeCloseTo(2.7852309e-17, 23);
    expect(o.uYLocal).toBeCloseTo(3.33795e-19, 24);
    expect(o.standardUncertainty).toBeCloseTo(2.027663e-18, 23);
    expect(o.coverageFactor).toBe(2);
    expect(o.expandedUncertainty).toBeCloseTo(4.055327e-18, 23);
  });

  it('at the same site (ΔC_local = 0 ± 0) the offset is the measured y with its own uncertainty', () => {
    const o = sideBySideOffset(2.4e-17, 1.5e-18, { deltaC_m2s2: 0, uDeltaC_m2s2: 0 }, 2.1);
    expect(o.offset).toBe(2.4e-17);
    expect(o.standardUncertainty).toBe(1.5e-18);
    expect(o.expandedUncertainty).toBeCloseTo(3.15e-18, 25);
  });

  it('refuses non-finite or negative inputs naming the field', () => {
    expect(() => sideBySideOffset(Number.NaN, 1e-18, { deltaC_m2s2: 0, uDeltaC_m2s2: 0 })).toThrow(ScienceInputError);
    expect(() => sideBySideOffset(1e-17, 1e-18, { deltaC_m2s2: 0, uDeltaC_m2s2: -1 })).toThrow(/uDeltaC/);
  });
});

describe('local tie from two benchmark ties: ΔC = g·(Δh_B − Δh_A)', () => {
  it('hand computation: Δh = 1.38 − 1.80 = −0.42 m, g = 9.81 m/s² → ΔC = −4.1202 m²/s², u = 9.81·√(0.002² + 0.002²) = 0.027 747 m²/s² (JCGM 100:2008 eq. 10)', () => {
    const t = localTieFromBenchmarks({ benchmarkCode: 'BM1', heightDifferenceM: 1.8, uncertaintyM: 0.002 }, { benchmarkCode: 'BM1', heightDifferenceM: 1.38, uncertaintyM: 0.002 }, 9.81);
    expect(t.deltaC_m2s2).toBeCloseTo(-4.1202, 10);
    expect(t.uDeltaC_m2s2).toBeCloseTo(0.0277469, 6);
    expect(t.source).toContain('g = 9.81 m/s²');
  });

  it('refuses ties to different benchmarks and an implausible gravity', () => {
    expect(() => localTieFromBenchmarks({ benchmarkCode: 'A', heightDifferenceM: 1, uncertaintyM: 0 }, { benchmarkCode: 'B', heightDifferenceM: 1, uncertaintyM: 0 }, 9.81)).toThrow(/different benchmarks/);
    expect(() => localTieFromBenchmarks({ benchmarkCode: 'A', heightDifferenceM: 1, uncertaintyM: 0 }, { benchmarkCode: 'A', heightDifferenceM: 1, uncertaintyM: 0 }, 98.1)).toThrow(/gravity/);
  });
});
