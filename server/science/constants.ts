// Physical and geodetic constants used throughout the science core.
// Sources: SI Brochure 9th ed. (BIPM 2019) for c; Moritz, "Geodetic Reference System 1980",
// J Geod 74:128–133 (2000) for GRS80; IAG Resolution 1 (2015) for W0; IAU 2000 Res. B1.9 for L_G.

/** Speed of light in vacuum, m/s — exact, SI defining constant (SI Brochure 2019, Table 1). */
export const C_M_PER_S = 299_792_458;
/** c² in m²/s², exact integer 89 875 517 873 681 764 (exceeds 2^53, so the float is rounded; use the string for exact work). */
export const C2_M2_PER_S2 = C_M_PER_S * C_M_PER_S;
export const C2_EXACT_STRING = '89875517873681764';

/** GRS80 defining constants (Moritz 2000). */
export const GRS80_A_M = 6_378_137;
export const GRS80_GM_M3_PER_S2 = 3_986_005e8;
export const GRS80_J2 = 108_263e-8;
export const GRS80_OMEGA_RAD_PER_S = 7_292_115e-11;

/** GRS80 derived constants: published digits of Moritz (2000); computed from the defining constants with Moritz's closed formulas (mpmath, 40 digits), rounded to the nearest double. */
export const GRS80_F = 1 / 298.257222100883;
export const GRS80_B_M = 6_356_752.31414035;
export const GRS80_E2 = 0.006694380022903416;
export const GRS80_EP2 = 0.006739496775481622;
/** m = ω²a²b/GM. */
export const GRS80_M = 0.003449786003077674;
export const GRS80_GAMMA_E_M_PER_S2 = 9.780326771534893;
export const GRS80_GAMMA_P_M_PER_S2 = 9.832186368519576;
/** Somigliana k = bγp/(aγe) − 1. */
export const GRS80_SOMIGLIANA_K = 0.001931851353260676;
/** Normal potential on the GRS80 ellipsoid — not to be confused with W0 (they differ by 7.45 m²/s²). */
export const GRS80_U0_M2_PER_S2 = 62_636_860.85;

/** IHRS conventional W0, m²/s² (IAG Resolution No. 1, 2015; Sánchez et al. 2016, J Geod 90:815). Heights refer to this. */
export const W0_IHRS_M2_PER_S2 = 62_636_853.4;
/** L_G, defining TT from TCG (IAU 2000 Resolution B1.9) — exact by definition. */
export const L_G = 6.969290134e-10;
/** c²·L_G: the potential implied by the time-scale convention (≈ 62 636 856.0 m²/s²); time-scale work refers to this. */
export const W0_LG_M2_PER_S2 = C2_M2_PER_S2 * L_G;

/** Standard acceleration of gravity (3rd CGPM 1901), exact conventional value. */
export const G_N_M_PER_S2 = 9.80665;

/** Summary stored with every computed result so it can be recomputed later. */
export const SOFTWARE_CONSTANTS = {
  c_m_per_s: C_M_PER_S,
  c2_m2_per_s2: C2_EXACT_STRING,
  ellipsoid: 'GRS80 (Moritz 2000)',
  grs80: {
    a_m: GRS80_A_M,
    gm_m3_per_s2: GRS80_GM_M3_PER_S2,
    j2: GRS80_J2,
    omega_rad_per_s: GRS80_OMEGA_RAD_PER_S,
    gammaE_m_per_s2: GRS80_GAMMA_E_M_PER_S2,
    gammaP_m_per_s2: GRS80_GAMMA_P_M_PER_S2,
  },
  w0_ihrs_m2_per_s2: W0_IHRS_M2_PER_S2,
  l_g: L_G,
  normalGravity: 'Somigliana closed form; mean normal gravity Heiskanen & Moritz 1967 eq. 4-42',
} as const;
