// Side-by-side comparison of two clocks: the offset between them once the small gravitational redshift of the local
// height difference is removed.
//
// Redshift relation to first order in 1/c² (as in server/science/redshift.ts and docs/science.md; IERS Conventions
// 2010, TN 36, ch. 10, relativistic time scales in the Earth's field): y_grav = ΔC / c², ΔC = C_B − C_A.
// The measured fractional offset y (B against A, tides removed) is y = y_clocks + ΔC_local/c², so
//   y_clocks = y − ΔC_local / c².
// Uncertainty by the law of propagation for uncorrelated inputs (JCGM 100:2008, eq. 10), sensitivity coefficients
// ∂y_clocks/∂y = 1 and ∂y_clocks/∂ΔC_local = −1/c²:
//   u²(y_clocks) = u²(y) + (u(ΔC_local)/c²)².
// A local tie derived from two benchmark ties to the same benchmark: Δh = Δh_B − Δh_A (each site above the
// benchmark), ΔC_local = g·Δh with a stated gravity g, u(ΔC_local) = g·√(u_A² + u_B²) (independent levellings).

import { C2_M2_PER_S2 } from './constants';
import { ScienceInputError } from './errors';

export type LocalTie = { deltaC_m2s2: number; uDeltaC_m2s2: number; source: string };

export interface SideBySideOffset {
  /** Measured fractional offset (B against A), tides removed. */
  yMeasured: number;
  uYMeasured: number;
  /** ΔC_local / c². */
  yLocal: number;
  uYLocal: number;
  /** Offset between the clocks: y − ΔC_local/c². */
  offset: number;
  standardUncertainty: number;
  coverageFactor: number;
  expandedUncertainty: number;
}

export function sideBySideOffset(yMeasured: number, uYMeasured: number, tie: Pick<LocalTie, 'deltaC_m2s2' | 'uDeltaC_m2s2'>, coverageFactor = 2): SideBySideOffset {
  for (const [field, v] of [['y', yMeasured], ['uY', uYMeasured], ['deltaC', tie.deltaC_m2s2], ['uDeltaC', tie.uDeltaC_m2s2]] as const) {
    if (!Number.isFinite(v)) throw new ScienceInputError(field, `${field} must be a finite number`);
  }
  if (uYMeasured < 0 || tie.uDeltaC_m2s2 < 0) throw new ScienceInputError('uDeltaC', 'uncertainties must not be negative');
  const yLocal = tie.deltaC_m2s2 / C2_M2_PER_S2;
  const uYLocal = tie.uDeltaC_m2s2 / C2_M2_PER_S2;
  const u = Math.hypot(uYMeasured, uYLocal);
  return { yMeasured, uYMeasured, yLocal, uYLocal, offset: yMeasured - yLocal, standardUncertainty: u, coverageFactor, expandedUncertainty: coverageFactor * u };
}

export type BenchmarkTie = { benchmarkCode: string; heightDifferenceM: number; uncertaintyM: number };

/** ΔC_local = C(site B) − C(site A) from both sites' ties to one benchmark, with gravity g [m/s²] stated by the caller. */
export function localTieFromBenchmarks(a: BenchmarkTie, b: BenchmarkTie, gravity_m_s2: number): LocalTie {
  if (a.benchmarkCode !== b.benchmarkCode) {
    throw new ScienceInputError('benchmark', `the two sites are tied to different benchmarks (${a.benchmarkCode}, ${b.benchmarkCode}); enter the local tie with its source instead`);
  }
  if (!(gravity_m_s2 > 9.7 && gravity_m_s2 < 9.9)) throw new ScienceInputError('gravity', 'gravity must be between 9.7 and 9.9 m/s²');
  const dh = b.heightDifferenceM - a.heightDifferenceM;
  return {
    deltaC_m2s2: gravity_m_s2 * dh,
    uDeltaC_m2s2: gravity_m_s2 * Math.hypot(a.uncertaintyM, b.uncertaintyM),
    source: `benchmark ties of both sites to ${a.benchmarkCode}: Δh = ${dh.toFixed(4)} m, ΔC = g·Δh with g = ${gravity_m_s2} m/s²`,
  };
}
