import geodesicLib from 'geographiclib-geodesic';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';

let t: TestApp;
let token: string;
beforeAll(async () => {
  t = await createTestApp();
  token = await tokenFor(t, 'petra.lind@audit-bureau.invalid'); // an auditor: the calculator is open to every role
});
afterAll(() => t.close());

const post = (path: string, body: unknown) => request(t.app).post(`/api/v1/calc/${path}`).set('authorization', `Bearer ${token}`).send(body as object);
const rel = (actual: number, expected: number) => Math.abs(actual / expected - 1);

/** NBS/NIST 1000-point set: NIST SP 1065 (Riley 2008) p. 107–108 (Park–Miller generator, n0 = 1 234 567 890). */
function nbs1000(): number[] {
  const y: number[] = [];
  let n = 1_234_567_890;
  for (let i = 0; i < 1000; i++) {
    y.push(n / 2_147_483_647);
    n = (16_807 * n) % 2_147_483_647;
  }
  return y;
}

describe('POST /api/v1/calc/redshift', () => {
  it('turns a 21-digit ratio into y, ΔC and Δh without losing the last digits', async () => {
    // 1e-18 ↔ 0.0898755 m²/s² (c² exact, SI Brochure 9th ed. Table 1; computed from c² with decimal arithmetic).
    const res = await post('redshift', { ratio: '1.00000000000000000100', latitudeDeg: 45, fractionalUncertainty: 1e-18 });
    expect(res.status).toBe(200);
    expect(res.body.fractionalOffset).toBe(1e-18);
    expect(res.body.fractionalOffsetDecimal).toBe('0.000000000000000001');
    expect(res.body.potentialDifference.unit).toBe('m2/s2');
    expect(rel(res.body.potentialDifference.value, 0.0898755178736818)).toBeLessThan(1e-12);
    expect(rel(res.body.potentialDifference.uncertainty, 0.0898755178736818)).toBeLessThan(1e-12);
    // γ(45°)/c² = 1.091087e-16 per metre (computed from Somigliana's formula with GRS80, Moritz 2000, mpmath) → Δh = 1e-18 / 1.091087e-16 m.
    expect(res.body.heightDifference.unit).toBe('m');
    expect(rel(res.body.heightDifference.value, 1e-18 / 1.091087e-16)).toBeLessThan(2e-6);
  });

  it('applies the reference ratio (y = R/R0 − 1) and keeps 21 significant digits', async () => {
    // 21 significant digits: R − 1 = 1.23456e-16 exactly (decimal arithmetic; float64 alone would give 1.2212e-16).
    const res = await post('redshift', { ratio: '1.00000000000000012345', referenceRatio: '1', latitudeDeg: 0 });
    expect(res.status).toBe(200);
    expect(res.body.fractionalOffsetDecimal).toBe('0.00000000000000012345');
    expect(res.body.potentialDifference.uncertainty).toBeNull();
    // CIPM 2009 Rec. 2: ⁸⁷Sr 429 228 004 229 873.7 Hz; ratio Sr/Sr measured equal to the reference → y = 0.
    const same = await post('redshift', { ratio: '2', referenceRatio: '2.0', latitudeDeg: 10 });
    expect(same.body.fractionalOffset).toBe(0);
  });

  it('answers a malformed ratio with 400 naming body.ratio', async () => {
    const res = await post('redshift', { ratio: '1.0000000000000000000001', latitudeDeg: 45 });
    expect(res.status).toBe(400);
    expect(res.headers['content-type']).toContain('application/problem+json');
    expect(res.body.issues.map((i: { path: string }) => i.path)).toContain('body.ratio');
    const neg = await post('redshift', { ratio: '-1', latitudeDeg: 45 });
    expect(neg.status).toBe(400);
    expect(neg.body.issues[0].path).toBe('body.ratio');
    const lat = await post('redshift', { ratio: '1', latitudeDeg: 95 });
    expect(lat.body.issues[0].path).toBe('body.latitudeDeg');
  });
});

describe('POST /api/v1/calc/stability', () => {
  it('reproduces the NIST SP 1065 1000-point OADEV, MDEV and TDEV table (p. 107–108)', async () => {
    const res = await post('stability', { tau0Seconds: 1, fractionalFrequency: nbs1000(), tauSeconds: [1, 10, 100] });
    expect(res.status).toBe(200);
    const [p1, p10, p100] = res.body.points;
    // Tolerance 1e-4 relative, as in the published test files quoting the table.
    expect(rel(p1.adev, 2.922319e-1)).toBeLessThan(1e-4);
    expect(rel(p10.adev, 9.159953e-2)).toBeLessThan(1e-4);
    expect(rel(p100.adev, 3.241343e-2)).toBeLessThan(1e-4);
    expect(rel(p10.mdev, 6.172376e-2)).toBeLessThan(1e-4);
    expect(rel(p100.mdev, 2.170921e-2)).toBeLessThan(1e-4);
    expect(rel(p1.tdev, 1.687202e-1)).toBeLessThan(1e-4);
    expect(rel(p10.tdev, 3.563623e-1)).toBeLessThan(1e-4);
    expect(rel(p100.tdev, 1.253382)).toBeLessThan(1e-4);
    expect(res.body.points.map((p: { tauSeconds: number }) => p.tauSeconds)).toEqual([1, 10, 100]);
    // The chi-square interval brackets the estimate (common practice).
    expect(p10.adevLow).toBeLessThan(p10.adev);
    expect(p10.adevHigh).toBeGreaterThan(p10.adev);
    expect(p1.n).toBe(999); // N − 2m overlapping terms with N = 1001 phase points (SP 1065 §5.2.4)
  });

  it('accepts phase data: the SP 1065 10-point phase set (NIST SP 1065 p. 107)', async () => {
    const x = [0, 103.11111, 123.22222, 157.33333, 166.44444, 48.55555, -96.33333, -2.22222, 111.88889, 0];
    const res = await post('stability', { tau0Seconds: 1, phaseSeconds: x, tauSeconds: [1, 2] });
    expect(res.status).toBe(200);
    expect(rel(res.body.points[0].adev, 91.22945)).toBeLessThan(1e-5);
    expect(rel(res.body.points[1].adev, 85.95287)).toBeLessThan(1e-5);
    expect(rel(res.body.points[1].mdev, 74.78849)).toBeLessThan(1e-5);
    expect(rel(res.body.points[1].tdev, 86.35831)).toBeLessThan(1e-5);
  });

  it('uses octave τ by default and refuses τ that is not a multiple of τ0', async () => {
    const res = await post('stability', { tau0Seconds: 2, fractionalFrequency: nbs1000() });
    expect(res.body.points.map((p: { tauSeconds: number }) => p.tauSeconds)).toEqual([2, 4, 8, 16, 32, 64, 128, 256, 512]);
    const bad = await post('stability', { tau0Seconds: 2, fractionalFrequency: nbs1000(), tauSeconds: [4, 5] });
    expect(bad.status).toBe(400);
    expect(bad.body.issues[0].path).toBe('body.tauSeconds.1');
    const both = await post('stability', { tau0Seconds: 1, fractionalFrequency: [1, 2, 3], phaseSeconds: [1, 2, 3, 4] });
    expect(both.status).toBe(400);
    expect(both.body.issues[0].path).toBe('body.fractionalFrequency');
  });

  it('takes 200 000 samples in one JSON body (the documented maximum; tests/api/calc-limits.test.ts refuses one more)', async () => {
    const y = Array.from({ length: 200_000 }, (_, i) => Math.sin(i * 0.7) * 1.234567890123e-15);
    const res = await post('stability', { tau0Seconds: 1, fractionalFrequency: y, tauSeconds: [1, 1000] });
    expect(res.status).toBe(200);
    expect(res.body.points).toHaveLength(2);
    expect(res.body.points[0].n).toBe(199_999);
  }, 60_000);
});

describe('POST /api/v1/calc/normal-gravity', () => {
  it('matches Somigliana on GRS80 at 0°, 45° and 90° (Moritz 2000; computed from the closed formula with mpmath at 40 digits)', async () => {
    for (const [lat, gamma] of [[0, 9.78032677153], [45, 9.80619920252], [90, 9.83218636852]]) {
      const res = await post('normal-gravity', { latitudeDeg: lat });
      expect(res.status).toBe(200);
      expect(Math.abs(res.body.gravity - gamma)).toBeLessThan(1e-10);
      expect(res.body.meanGravityToHeight).toBe(res.body.gravity); // height 0: the mean is the surface value
    }
  });

  it('applies the second-order height formula (H&M 1967 eq. 2-124, equation number from memory; 45°, 1000 m computed with mpmath)', async () => {
    const res = await post('normal-gravity', { latitudeDeg: 45, heightM: 1000 });
    expect(Math.abs(res.body.gravity - 9.80311437625)).toBeLessThan(1e-10);
    // The mean along the plumb line lies half-way in the (nearly linear) free-air decrease: common practice.
    expect(Math.abs(res.body.meanGravityToHeight - (9.80619920252 + 9.80311437625) / 2)).toBeLessThan(1e-6);
  });
});

describe('POST /api/v1/calc/geodesic', () => {
  const grs80 = new geodesicLib.Geodesic.Geodesic(6_378_137, 1 / 298.257222100883);
  it('agrees with GeographicLib (geographiclib-geodesic, Karney 2013) run on GRS80, and with the published WGS84 cases to their rounding', async () => {
    // GeodSolve0 (GeographicLib test suite, WGS84): s = 5 853 226 m ± 0.5 m, α1 = 53.47022°, α2 = 111.59367° (Karney 2013, J Geod 87:43).
    // GRS80 and WGS84 differ by 1.6e-11 in f, i.e. < 0.1 mm over this line, far below the published rounding.
    const res = await post('geodesic', { from: { latitudeDeg: 40.6, longitudeDeg: -73.8 }, to: { latitudeDeg: 49.01666667, longitudeDeg: 2.55 } });
    expect(res.status).toBe(200);
    expect(Math.abs(res.body.distanceM - 5_853_226)).toBeLessThan(0.5);
    expect(Math.abs(res.body.azimuthFromDeg - 53.47022)).toBeLessThan(0.5e-5);
    expect(Math.abs(res.body.azimuthToDeg - 111.59367)).toBeLessThan(0.5e-5);
    const ref = grs80.Inverse(40.6, -73.8, 49.01666667, 2.55);
    expect(Math.abs(res.body.distanceM - ref.s12!)).toBeLessThan(1e-8);

    // Karney 2013 near-antipodal inverse (WGS84): s = 19 989 832.827610 m, α1 = 161.890524736°, α2 = 18.090737246°.
    const anti = await post('geodesic', { from: { latitudeDeg: -30, longitudeDeg: 0 }, to: { latitudeDeg: 29.9, longitudeDeg: 179.8 } });
    expect(Math.abs(anti.body.distanceM - 19_989_832.82761)).toBeLessThan(0.005);
    expect(Math.abs(anti.body.azimuthFromDeg - 161.890524736)).toBeLessThan(1e-6);
    expect(Math.abs(anti.body.azimuthToDeg - 18.090737246)).toBeLessThan(1e-6);
    const antiRef = grs80.Inverse(-30, 0, 29.9, 179.8);
    expect(Math.abs(anti.body.distanceM - antiRef.s12!)).toBeLessThan(1e-8);
    expect(Math.abs(anti.body.azimuthFromDeg - antiRef.azi1!)).toBeLessThan(1e-12);
  });

  it('gives the GRS80 meridian quadrant from the equator to the pole (Moritz 2000: Q = 10 001 965.7293 m [from memory])', async () => {
    const res = await post('geodesic', { from: { latitudeDeg: 0, longitudeDeg: 10 }, to: { latitudeDeg: 90, longitudeDeg: 10 } });
    expect(Math.abs(res.body.distanceM - 10_001_965.7293)).toBeLessThan(0.001);
    expect(res.body.azimuthFromDeg).toBeCloseTo(0, 10);
  });

  it('refuses a latitude beyond the pole, naming the field', async () => {
    const res = await post('geodesic', { from: { latitudeDeg: 91, longitudeDeg: 0 }, to: { latitudeDeg: 0, longitudeDeg: 0 } });
    expect(res.status).toBe(400);
    expect(res.body.issues[0].path).toBe('body.from.latitudeDeg');
  });
});

describe('POST /api/v1/calc/transform', () => {
  it('geographic → geocentric: EPSG GN 7-2 §4.1.1 example (method 9602, WGS 84)', async () => {
    // φ = 53°48′33.820″N, λ = 2°07′46.380″E, h = 73 m → X 3 771 793.968, Y 140 253.342, Z 5 124 304.349 m.
    const lat = 53 + 48 / 60 + 33.82 / 3600;
    const lon = 2 + 7 / 60 + 46.38 / 3600;
    const res = await post('transform', { from: 'EPSG:4979', to: 'EPSG:4978', coordinates: [lon, lat, 73] });
    expect(res.status).toBe(200);
    const [x, y, z] = res.body.coordinates;
    expect(Math.abs(x - 3_771_793.968)).toBeLessThan(0.002);
    expect(Math.abs(y - 140_253.342)).toBeLessThan(0.002);
    expect(Math.abs(z - 5_124_304.349)).toBeLessThan(0.002);
    // Geocentric CRSs have axes X, Y, Z in metres (EPSG GN 7-2 §4.1.1).
    expect(res.body.axes).toEqual([{ name: 'X', unit: 'm' }, { name: 'Y', unit: 'm' }, { name: 'Z', unit: 'm' }]);
  });

  it('transverse Mercator: EPSG GN 7-2 method 9807 example (OSGB 1936 / British National Grid, k0 as printed 0.9996013)', async () => {
    // φ = 50°30′N, λ = 0°30′E → E = 577 274.99 m, N = 69 740.50 m (EPSG Guidance Note 7-2, method 9807 example).
    const airy = '+proj=longlat +a=6377563.396 +rf=299.3249646 +no_defs';
    const bng = '+proj=tmerc +lat_0=49 +lon_0=-2 +k=0.9996013 +x_0=400000 +y_0=-100000 +a=6377563.396 +rf=299.3249646 +units=m +no_defs';
    const res = await post('transform', { from: airy, to: bng, coordinates: [0.5, 50.5] });
    expect(res.status).toBe(200);
    expect(res.body.coordinates).toHaveLength(2);
    expect(Math.abs(res.body.coordinates[0] - 577_274.99)).toBeLessThan(0.01);
    expect(Math.abs(res.body.coordinates[1] - 69_740.5)).toBeLessThan(0.01);
    // A projected CRS gives easting and northing in metres (EPSG GN 7-2 method 9807).
    expect(res.body.axes.map((a: { name: string; unit: string }) => a.unit)).toEqual(['m', 'm']);
    expect(res.body.axes[0].name).toMatch(/^Easting/);
  });

  it('refuses an unknown CRS naming body.from', async () => {
    const res = await post('transform', { from: 'EPSG:999999', to: 'EPSG:4978', coordinates: [0, 0] });
    expect(res.status).toBe(400);
    expect(res.body.issues[0].path).toBe('body.from');
  });
});

describe('POST /api/v1/calc/tide', () => {
  it('returns the clock tidal potential: sizes as published, and tide-free − mean-tide = (1 + k2 − h2)·W_perm', async () => {
    const epochs = Array.from({ length: 30 * 24 }, (_, i) => new Date(Date.UTC(2026, 0, 1) + i * 3_600_000).toISOString());
    const site = { latitudeDeg: 52.3, longitudeDeg: 7.4, heightM: 100 };
    const mean = await post('tide', { site, epochs });
    expect(mean.status).toBe(200);
    expect(mean.body.tideSystem).toBe('mean-tide');
    expect(mean.body.potential).toHaveLength(epochs.length);
    const w: number[] = mean.body.potential;
    // Tidal potential amplitudes reach about 3 m²/s² (EMRP ITOC project page; Voigt et al. 2016): the clock potential is
    // of that order (a single peak with Moon and Sun aligned may exceed it slightly) and swings by more than 1 m²/s² over a month.
    expect(Math.max(...w.map(Math.abs))).toBeLessThan(4);
    expect(Math.max(...w) - Math.min(...w)).toBeGreaterThan(1);
    expect(mean.body.fractionalFrequency[0]).toBeCloseTo(-w[0] / 299_792_458 ** 2, 30);

    const free = await post('tide', { site, epochs: epochs.slice(0, 3), tideSystem: 'tide-free' });
    // W_perm(52.3°) ≈ −0.85 m²/s², computed from Ekman (1989, Bull. Géod. 63:281) γ·(0.099 − 0.296 sin²φ) m;
    // 1 + k2 − h2 = 0.68745 with elastic k2 = 0.29525 (IERS Conventions 2010, Table 6.3) and h2 = 0.6078 (§7.1.1).
    const shift = free.body.potential[0] - w[0];
    expect(Math.abs(shift - 0.68745 * -0.85)).toBeLessThan(0.01);
  });

  it('refuses a malformed epoch, naming its index', async () => {
    const res = await post('tide', { site: { latitudeDeg: 1, longitudeDeg: 2, heightM: 0 }, epochs: ['2026-01-01T00:00:00Z', 'yesterday'] });
    expect(res.status).toBe(400);
    expect(res.body.issues[0].path).toBe('body.epochs.1');
  });
});

describe('POST /api/v1/calc/budget', () => {
  it('JCGM 100:2008 H.1 (end gauge): u_c = 32 nm, ν_eff = 16 (truncated), k = t_99(16) = 2.92, U_99 = 93 nm (H.1.4–H.1.6, Table G.2)', async () => {
    // Table H.1 contributions and degrees of freedom [from memory of Table H.1]: 25 nm (18), 9.7 nm (25.6), 2.9 nm (50), 16.6 nm (2).
    const components = [
      { name: 'calibration of the standard l_s', standardUncertainty: 25, degreesOfFreedom: 18 },
      { name: 'measured difference d', standardUncertainty: 9.7, degreesOfFreedom: 25.6 },
      { name: 'expansion coefficient difference δα', standardUncertainty: 0.58e-6, sensitivity: 0.05e9 * 0.1, degreesOfFreedom: 50 },
      { name: 'temperature difference δθ', standardUncertainty: 0.029, sensitivity: -0.05e9 * 11.5e-6, degreesOfFreedom: 2 },
    ];
    const res = await post('budget', { components, coverageProbability: 0.99 });
    expect(res.status).toBe(200);
    expect(Math.round(res.body.combinedStandardUncertainty)).toBe(32);
    expect(Math.floor(res.body.effectiveDegreesOfFreedom)).toBe(16);
    expect(res.body.coverageFactor).toBeCloseTo(2.92, 2);
    expect(Math.round(res.body.expandedUncertainty)).toBe(93);
    expect(res.body.coverageProbability).toBe(0.99);
    // Default p = 95.45 %: k = t_95.45(16) = 2.17 (Table G.2).
    const def = await post('budget', { components });
    expect(def.body.coverageProbability).toBeCloseTo(0.9545, 4);
    expect(def.body.coverageFactor).toBeCloseTo(2.17, 2);
  });

  it('gives k = 2 and ν_eff null when no component has finite degrees of freedom (G.6.6: ν_eff large → k = 2 for p ≈ 95.45 %)', async () => {
    const res = await post('budget', { components: [{ name: 'a', standardUncertainty: 3e-18 }, { name: 'b', standardUncertainty: 4e-18, sensitivity: -1, degreesOfFreedom: null }] });
    expect(res.status).toBe(200);
    expect(res.body.effectiveDegreesOfFreedom).toBeNull();
    expect(res.body.coverageFactor).toBeCloseTo(2, 10);
    expect(res.body.combinedStandardUncertainty).toBeCloseTo(5e-18, 30);
    expect(res.body.expandedUncertainty).toBeCloseTo(1e-17, 28);
  });

  it('answers a problem naming the field for a negative uncertainty or a probability out of range', async () => {
    const res = await post('budget', { components: [{ name: 'a', standardUncertainty: -1 }] });
    expect(res.status).toBe(400);
    expect(res.headers['content-type']).toContain('application/problem+json');
    expect(JSON.stringify(res.body)).toContain('components.0.standardUncertainty');
    const p = await post('budget', { components: [{ name: 'a', standardUncertainty: 1 }], coverageProbability: 1.5 });
    expect(p.status).toBe(400);
    expect(JSON.stringify(p.body)).toContain('coverageProbability');
  });
});
