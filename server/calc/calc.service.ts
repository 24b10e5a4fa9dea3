import type {
  BudgetResponse, GeodesicRequest, GeodesicResponse, NormalGravityRequest, NormalGravityResponse, RedshiftResponse, StabilityPointDto, StabilityResponse,
  TideResponse, TransformResponse,
} from '../../shared/calc';
import { budgetRequestSchema, redshiftRequestSchema, stabilityRequestSchema, tideRequestSchema, transformRequestSchema } from '../../shared/calc';
import type { z } from 'zod';
import { Invalid } from '../http/errors';
import { ScienceInputError } from '../science/errors';
import { geodesicInverse, resolveCrs, toGrs80Geodetic, transform } from '../science/geodesy';
import { meanNormalGravity, normalGravityAtHeight } from '../science/normal-gravity';
import { redshiftCalculator } from '../science/redshift';
import type { StabilityPoint } from '../science/stability';
import { tidePotentialSeries } from '../science/tides';
import { stabilityInWorker } from './stability-pool';
import { C2_M2_PER_S2 } from '../science/constants';
import { COVERAGE_PROBABILITY_K2, combineBudget } from '../science/uncertainty';

// Calculator service: no state, no database; each function validates what zod cannot (multiples of τ0, CRS strings)
// and turns the science core's ScienceInputError into a 400 naming the request field.

/** Runs science code and maps its field names onto request paths (`body.<field>`). */
export function withFieldMap<T>(fn: () => T, fieldMap: Record<string, string> = {}): T {
  try {
    return fn();
  } catch (e) {
    if (e instanceof ScienceInputError) {
      const head = e.field.split(/[.[]/)[0];
      const mapped = Object.hasOwn(fieldMap, head) ? fieldMap[head] + e.field.slice(head.length) : e.field;
      throw new Invalid(`The request body is not valid: ${e.message}`, [{ path: `body.${mapped}`, message: e.message.replace(/^[^:]*: /, '') }]);
    }
    throw e;
  }
}

export function redshift(body: z.output<typeof redshiftRequestSchema>): RedshiftResponse {
  const r = withFieldMap(() => redshiftCalculator(body));
  return {
    fractionalOffset: r.fractionalOffset.value,
    fractionalOffsetDecimal: r.fractionalOffset.decimal,
    potentialDifference: r.potentialDifference,
    heightDifference: r.heightDifference,
    coverageFactor: 1,
    method:
      'y = R/R0 − 1 in 50-digit decimal arithmetic; ΔC = c²·y (first order in 1/c²); ΔH = H_N(C_A + ΔC) − H_A (normal heights) with GRS80 mean normal gravity along the normal plumb line at the given latitude. Uncertainties are standard (k = 1), propagated from the given u(y).',
  };
}

/** Runs science code (sync or async) and maps its field names onto request paths (`body.<field>`). */
async function withFieldMapAsync<T>(fn: () => Promise<T>, fieldMap: Record<string, string> = {}): Promise<T> {
  try {
    return await fn();
  } catch (e) {
    return withFieldMap(() => {
      throw e;
    }, fieldMap);
  }
}

export async function stability(body: z.output<typeof stabilityRequestSchema>): Promise<StabilityResponse> {
  const tau0 = body.tau0Seconds;
  const ms = body.tauSeconds?.map((tau, i) => {
    const m = Math.round(tau / tau0);
    if (m < 1 || Math.abs(tau / tau0 - m) > 1e-9 * Math.max(1, m)) {
      throw new Invalid('The request body is not valid.', [{ path: `body.tauSeconds.${i}`, message: 'must be a whole multiple of tau0Seconds' }]);
    }
    return m;
  });
  // in a worker thread: the analysis of 10⁵ samples at 200 averaging times takes ~0.3 s of CPU
  const points = await withFieldMapAsync(
    () =>
      stabilityInWorker({
        tau0Seconds: tau0,
        y: body.fractionalFrequency ? Float64Array.from(body.fractionalFrequency) : undefined,
        x: body.phaseSeconds ? Float64Array.from(body.phaseSeconds) : undefined,
        ms,
      }),
    { y: 'fractionalFrequency', x: 'phaseSeconds', ms: 'tauSeconds' },
  );
  return {
    points: points.map(stabilityPointDto),
    method: STABILITY_METHOD,
  };
}

export const STABILITY_METHOD =
  'Overlapping Allan deviation (adev), modified Allan deviation (mdev), time deviation (tdev, seconds), overlapping Hadamard deviation (hdev) and total deviation (totdev, records without gaps) after NIST SP 1065 §5.2; *Low/*High: 68.3 % chi-square intervals with the EDF of Greenhall & Riley (2003) for the noise type found at each τ (lag-1 autocorrelation, SP 1065 §5.6; B1 ratio and R(n) where the autocorrelation is inconclusive).';

export function stabilityPointDto(p: StabilityPoint): StabilityPointDto {
  return {
    tauSeconds: p.tauSeconds, n: p.n, adev: p.adev, adevLow: p.adevLow, adevHigh: p.adevHigh, mdev: p.mdev, tdev: p.tdev,
    edf: p.edf, noiseType: p.noiseType, noiseIdentified: p.noiseIdentified, noiseMethod: p.noiseMethod,
    mdevLow: p.mdevLow, mdevHigh: p.mdevHigh, tdevLow: p.tdevLow, tdevHigh: p.tdevHigh,
    hdev: p.hdev, hdevLow: p.hdevLow, hdevHigh: p.hdevHigh, totdev: p.totdev,
  };
}

export function normalGravity(body: Required<NormalGravityRequest>): NormalGravityResponse {
  return {
    gravity: normalGravityAtHeight(body.latitudeDeg, body.heightM),
    meanGravityToHeight: meanNormalGravity(body.latitudeDeg, body.heightM),
    unit: 'm/s2',
    ellipsoid: 'GRS80',
  };
}

export function geodesic(body: GeodesicRequest): GeodesicResponse {
  const r = withFieldMap(() => geodesicInverse(body.from, body.to));
  return { distanceM: r.distanceM, azimuthFromDeg: r.azimuth1Deg, azimuthToDeg: r.azimuth2Deg, ellipsoid: 'GRS80' };
}

function axesOf(kind: ReturnType<typeof resolveCrs>['kind']): { name: string; unit: string }[] {
  if (kind === 'geocentric') return [{ name: 'X', unit: 'm' }, { name: 'Y', unit: 'm' }, { name: 'Z', unit: 'm' }];
  if (kind === 'projected') return [{ name: 'Easting E', unit: 'm' }, { name: 'Northing N', unit: 'm' }, { name: 'Ellipsoidal height h', unit: 'm' }];
  return [{ name: 'Longitude λ', unit: '°' }, { name: 'Latitude φ', unit: '°' }, { name: 'Ellipsoidal height h', unit: 'm' }];
}

export function coordinateTransform(body: z.output<typeof transformRequestSchema>): TransformResponse {
  const coordinates = withFieldMap(() => transform(body.from, body.to, body.coordinates), { coords: 'coordinates' });
  // The frame assumptions (which datums are taken as coincident) travel with the numbers.
  const assumptions = withFieldMap(() => toGrs80Geodetic(body.from, body.coordinates).assumptions, { crs: 'from', coords: 'coordinates' });
  const target = withFieldMap(() => resolveCrs(body.to, 'to'));
  return { coordinates, axes: axesOf(target.kind).slice(0, coordinates.length), targetCrs: target.label, assumptions };
}

const MJD_UNIX_EPOCH = 40_587;

export function tide(body: z.output<typeof tideRequestSchema>): TideResponse {
  const epochsMjd = Float64Array.from(body.epochs, (iso) => Date.parse(iso) / 86_400_000 + MJD_UNIX_EPOCH);
  const site = { latitudeDeg: body.site.latitudeDeg, longitudeDeg: body.site.longitudeDeg, ellipsoidalHeightM: body.site.heightM };
  const potential = Array.from(withFieldMap(() => tidePotentialSeries(site, epochsMjd, { removePermanent: body.tideSystem === 'mean-tide' }), { epochsMjd: 'epochs' }));
  return {
    potential,
    fractionalFrequency: potential.map((w) => -w / C2_M2_PER_S2),
    tideSystem: body.tideSystem,
    unit: 'm2/s2',
    method:
      'Degree-2 Moon and Sun tidal potential times 1 + k2 − h2 = 0.68745 (IERS Conventions 2010, ch. 6–7), body positions from astronomy-engine; mean-tide leaves out the permanent part, tide-free keeps it. Epochs are UTC (UT1 − UTC neglected).',
  };
}

export function budget(body: z.output<typeof budgetRequestSchema>): BudgetResponse {
  const p = body.coverageProbability ?? COVERAGE_PROBABILITY_K2;
  const b = withFieldMap(() =>
    combineBudget(
      body.components.map((c) => ({
        name: c.name, type: c.degreesOfFreedom ? 'A' : 'B', standardUncertainty: c.standardUncertainty, sensitivity: c.sensitivity, unit: '',
        degreesOfFreedom: c.degreesOfFreedom ?? undefined,
      })),
      { coverageProbability: p },
    ),
  );
  return {
    combinedStandardUncertainty: b.combinedStandardUncertainty,
    effectiveDegreesOfFreedom: Number.isFinite(b.effectiveDegreesOfFreedom) ? b.effectiveDegreesOfFreedom : null,
    coverageFactor: b.coverageFactor,
    expandedUncertainty: b.expandedUncertainty,
    coverageProbability: p,
    contributions: b.lines.map((l) => ({ name: l.name, contribution: l.contribution, varianceShare: l.varianceShare })),
    method:
      'u_c = √Σ(c_i·u(x_i))² for uncorrelated inputs (JCGM 100:2008 eq. 10); ν_eff by Welch–Satterthwaite (G.2b), truncated to an integer; k = t_p(ν_eff) (G.4.1, G.6.4), the normal quantile when ν_eff is infinite.',
  };
}
