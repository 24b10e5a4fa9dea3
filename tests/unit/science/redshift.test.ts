import { describe, expect, it } from 'vitest';
import { heightDifferenceFromDeltaC, potentialDifferenceFromY, redshiftCalculator } from '../../../server/science/redshift';

describe('gravitational redshift', () => {
  it('1e-18 ↔ 0.089 875 5 m²/s² (computed from the exact c², SI Brochure 9th ed. Table 1)', () => {
    const { deltaC_m2s2, uDeltaC_m2s2 } = potentialDifferenceFromY(1e-18, 2e-18);
    expect(deltaC_m2s2).toBeCloseTo(0.0898755178736818, 15);
    expect(uDeltaC_m2s2).toBeCloseTo(0.1797510357, 9);
    expect(potentialDifferenceFromY(1e-18).uDeltaC_m2s2).toBeNull();
  });

  it('one metre of height is g/c² ≈ 1.091e-16 (γ(45°)/c² = 1.091 087e-16, computed from the Somigliana formula with GRS80, Moritz 2000)', () => {
    const result = redshiftCalculator({ ratio: '1.00000000000000010911', latitudeDeg: 45 }); // 21 digits
    expect(result.heightDifference.value).toBeCloseTo(1.0, 4);
  });

  it('1e-18 is about 9.16 mm near sea level (0.009 164 8 m at g_n = 9.806 65 m/s², computed)', () => {
    const { deltaH_m } = heightDifferenceFromDeltaC(0.0898755178736818, 45, 0);
    // γ(45°) = 9.806 199 m/s² differs from g_n by 5e-5 relative, well inside the 1e-5 m tolerance.
    expect(deltaH_m).toBeCloseTo(0.0091648, 5);
  });

  it('gives the sign by the documented convention: ν_B > ν_A means B is higher', () => {
    const up = redshiftCalculator({ ratio: '1.0000000000000001', latitudeDeg: 52.3, normalHeightM: 100, fractionalUncertainty: 1e-18 });
    expect(up.potentialDifference.value).toBeGreaterThan(0);
    expect(up.heightDifference.value).toBeGreaterThan(0.9);
    expect(up.heightDifference.unit).toBe('m');
    expect(up.potentialDifference.unit).toBe('m2/s2');
    // u(ΔH) = u(ΔC)/γ̄: 0.0898755/9.8124 (γ0(52.3°) from Somigliana's formula, Moritz 2000, 100 m gives < 1e-5 relative change).
    expect(up.heightDifference.uncertainty).toBeCloseTo(0.0898755 / 9.81273891838, 6);
    const down = redshiftCalculator({ ratio: '0.9999999999999999', latitudeDeg: 52.3 });
    expect(down.heightDifference.value).toBeLessThan(0);
    expect(down.heightDifference.uncertainty).toBeNull();
  });

  it('height difference depends on the starting height only through γ̄ (≈ 3e-7 relative per metre, H&M 1967 eq. 4-42)', () => {
    const atSea = heightDifferenceFromDeltaC(9000, 45, 0).deltaH_m;
    const atAlt = heightDifferenceFromDeltaC(9000, 45, 2000).deltaH_m;
    expect(atAlt / atSea - 1).toBeGreaterThan(2000 * 3.0e-7);
    expect(atAlt / atSea - 1).toBeLessThan(2000 * 3.3e-7);
  });
});
