import { describe, expect, it } from 'vitest';
import {
  C2_EXACT_STRING,
  C_M_PER_S,
  GRS80_B_M,
  GRS80_E2,
  GRS80_F,
  GRS80_GAMMA_E_M_PER_S2,
  GRS80_GAMMA_P_M_PER_S2,
  GRS80_GM_M3_PER_S2,
  GRS80_A_M,
  GRS80_M,
  GRS80_OMEGA_RAD_PER_S,
  GRS80_SOMIGLIANA_K,
  W0_LG_M2_PER_S2,
  SOFTWARE_CONSTANTS,
} from '../../../server/science/constants';

describe('constants', () => {
  it('c² is the exact square of the SI value (SI Brochure 2019 Table 1)', () => {
    expect((BigInt(C_M_PER_S) ** 2n).toString()).toBe(C2_EXACT_STRING);
    expect(C2_EXACT_STRING).toBe('89875517873681764');
  });

  it('GRS80 derived constants are consistent with the defining ones (Moritz 2000, published values)', () => {
    // b = a(1 − f) and e² = f(2 − f): definitions of the ellipsoid.
    expect(GRS80_A_M * (1 - GRS80_F)).toBeCloseTo(6_356_752.3141, 4);
    expect(GRS80_F * (2 - GRS80_F)).toBeCloseTo(GRS80_E2, 15);
    expect(GRS80_B_M).toBeCloseTo(6_356_752.3141, 4);
    expect(1 / GRS80_F).toBeCloseTo(298.257222101, 9);
    // m = ω²a²b/GM (Moritz 2000), published 0.003 449 786 003 08.
    expect((GRS80_OMEGA_RAD_PER_S ** 2 * GRS80_A_M ** 2 * GRS80_B_M) / GRS80_GM_M3_PER_S2).toBeCloseTo(GRS80_M, 14);
    expect(GRS80_M).toBeCloseTo(0.00344978600308, 14);
    // Published γe = 9.780 326 7715, γp = 9.832 186 3685 m/s².
    expect(GRS80_GAMMA_E_M_PER_S2).toBeCloseTo(9.7803267715, 10);
    expect(GRS80_GAMMA_P_M_PER_S2).toBeCloseTo(9.8321863685, 10);
    // Somigliana k = bγp/(aγe) − 1, published 0.001 931 851 353.
    expect((GRS80_B_M * GRS80_GAMMA_P_M_PER_S2) / (GRS80_A_M * GRS80_GAMMA_E_M_PER_S2) - 1).toBeCloseTo(GRS80_SOMIGLIANA_K, 14);
    expect(GRS80_SOMIGLIANA_K).toBeCloseTo(0.001931851353, 12);
  });

  it('W0 implied by L_G is 62 636 856.0 m²/s² (IAU 2000 Resolution B1.9, from memory; computed as c²·L_G)', () => {
    expect(W0_LG_M2_PER_S2).toBeCloseTo(62_636_856.0, 1);
    expect(SOFTWARE_CONSTANTS.w0_ihrs_m2_per_s2).toBe(62_636_853.4);
  });
});
