import { describe, expect, it } from 'vitest';
import { combineBudget, rss } from '../../../server/science/uncertainty';

describe('GUM budget', () => {
  it('reproduces JCGM 100:2008 example H.1 (end-gauge calibration), first-order budget', () => {
    // Contributions |c_i|·u(x_i) in nm and their degrees of freedom as published in GUM H.1 Table H.1, transcribed in the
    // GUM Tree Calculator documentation (MSL, docs/API/GUM_H1.rst): l_s 25 (ν 18), δθ 16.599 (ν 2), comparator
    // systematic 6.7 (ν 8), repeated observations 5.8 (ν 24), comparator random 3.9 (ν 5), δα 2.88679 (ν 50).
    const nm = 'nm';
    const budget = combineBudget(
      [
        { name: 'calibration of standard l_s', type: 'B', standardUncertainty: 25, sensitivity: 1, unit: nm, degreesOfFreedom: 18 },
        { name: 'temperature difference δθ', type: 'B', standardUncertainty: 0.05 / Math.sqrt(3), sensitivity: -50_000_623 * 11.5e-6, unit: nm, degreesOfFreedom: 2 },
        { name: 'comparator systematic', type: 'B', standardUncertainty: 6.7, sensitivity: 1, unit: nm, degreesOfFreedom: 8 },
        { name: 'repeated observations', type: 'A', standardUncertainty: 5.8, sensitivity: 1, unit: nm, degreesOfFreedom: 24 },
        { name: 'comparator random', type: 'A', standardUncertainty: 3.9, sensitivity: 1, unit: nm, degreesOfFreedom: 5 },
        { name: 'expansion coefficient difference δα', type: 'B', standardUncertainty: 1e-6 / Math.sqrt(3), sensitivity: -50_000_623 * -0.1, unit: nm, degreesOfFreedom: 50 },
        { name: 'expansion coefficient α_s', type: 'B', standardUncertainty: 2e-6 / Math.sqrt(3), sensitivity: 0, unit: nm },
      ],
      { fixedCoverageFactor: 2 },
    );
    expect(budget.lines[1].contribution).toBeCloseTo(16.599, 3);
    expect(budget.lines[5].contribution).toBeCloseTo(2.88679, 4);
    expect(budget.lines[6].contribution).toBe(0);
    // GUM H.1.4: u_c(l) = 32 nm (published, rounded). GTC docs print 50000838(32).
    expect(Math.round(budget.combinedStandardUncertainty)).toBe(32);
    // GUM H.1.6: ν_eff(l) ≈ 16.7, stated as 16 after truncation [from memory]; Welch–Satterthwaite here.
    expect(Math.floor(budget.effectiveDegreesOfFreedom)).toBe(16);
    expect(budget.expandedUncertainty).toBeCloseTo(2 * budget.combinedStandardUncertainty, 12);
    const shares = budget.lines.reduce((s, l) => s + l.varianceShare, 0);
    expect(shares).toBeCloseTo(1, 12);
  });

  it('RSS and Type-B-only budgets (common practice: ν_eff infinite without finite dofs)', () => {
    expect(rss([3, 4])).toBe(5);
    const b = combineBudget([
      { name: 'a', type: 'B', standardUncertainty: 3e-18, sensitivity: 1, unit: '1' },
      { name: 'b', type: 'B', standardUncertainty: 4e-18, sensitivity: -1, unit: '1' },
    ]);
    expect(b.combinedStandardUncertainty).toBeCloseTo(5e-18, 30);
    expect(b.expandedUncertainty).toBeCloseTo(1e-17, 30);
    expect(b.effectiveDegreesOfFreedom).toBe(Infinity);
  });

  it('Welch–Satterthwaite with a single component returns its own dof (JCGM 100 eq. G.2b)', () => {
    const b = combineBudget([{ name: 'x', type: 'A', standardUncertainty: 2, sensitivity: 3, unit: 'm', degreesOfFreedom: 7 }]);
    expect(b.effectiveDegreesOfFreedom).toBeCloseTo(7, 12);
  });
});
