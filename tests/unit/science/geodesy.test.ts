import { describe, expect, it } from 'vitest';
import {
  chordDistanceM,
  geocentricToGeodetic,
  geodesicDirect,
  geodesicInverse,
  geodeticToGeocentric,
  listCrs,
  toGrs80Geodetic,
  transform,
  WGS84_ELLIPSOID,
} from '../../../server/science/geodesy';
import { ScienceInputError } from '../../../server/science/errors';

const dms = (d: number, m: number, s: number): number => d + m / 60 + s / 3600;

describe('CRS registry and transformations', () => {
  it('lists the supported CRSs with labels', () => {
    const codes = listCrs().map((c) => c.code);
    for (const code of ['EPSG:4258', 'EPSG:4937', 'EPSG:4936', 'EPSG:25828', 'EPSG:25838', 'EPSG:7912', 'EPSG:7789', 'EPSG:9989', 'EPSG:9988', 'EPSG:4326', 'EPSG:4979', 'EPSG:4978', 'EPSG:32601', 'EPSG:32660', 'EPSG:32701', 'EPSG:32760']) {
      expect(codes).toContain(code);
    }
    expect(listCrs().every((c) => c.label.length > 0)).toBe(true);
  });

  it('EPSG GN 7-2 method 9807 example (OSGB 1936 / British National Grid) with k0 = 0.9996013 as printed (EPSG Guidance Note 7-2, IOGP 373-7-2)', () => {
    const airy = '+proj=longlat +a=6377563.396 +rf=299.3249646 +no_defs';
    const grid = '+proj=tmerc +lat_0=49 +lon_0=-2 +k=0.9996013 +x_0=400000 +y_0=-100000 +a=6377563.396 +rf=299.3249646 +units=m +no_defs';
    const [e, n] = transform(airy, grid, [dms(0, 30, 0), dms(50, 30, 0)]);
    expect(e).toBeCloseTo(577_274.99, 2);
    expect(n).toBeCloseTo(69_740.5, 2);
    const [lon, lat] = transform(grid, airy, [577_274.99, 69_740.5]);
    // GN 7-2: the reverse returns the input to 0.001″.
    expect(Math.abs(lon - 0.5) * 3600).toBeLessThan(0.001);
    expect(Math.abs(lat - 50.5) * 3600).toBeLessThan(0.001);
  });

  it('UTM examples to 1 mm (computed from the Krüger n⁴ series of EPSG GN 7-2 §3.5.3.1 with Python mpmath at 40 digits)', () => {
    const cases: [string, number, number, number, number][] = [
      ['EPSG:32632', 52.3, 7.4, 390_898.4597, 5_795_611.3642],
      ['EPSG:32631', 48.858222, 2.2945, 448_251.8179, 5_411_935.1232],
      ['EPSG:32756', -33.9, 151.2, 333_568.941, 6_247_473.3368],
      ['EPSG:32632', 60, 5.9, 327_131.3639, 6_655_462.6839],
      ['EPSG:32631', 0, 3, 500_000, 0],
    ];
    for (const [code, lat, lon, e, n] of cases) {
      const [x, y] = transform('EPSG:4326', code, [lon, lat]);
      expect(Math.abs(x - e)).toBeLessThan(0.001);
      expect(Math.abs(y - n)).toBeLessThan(0.001);
    }
    // ETRS89 / UTM 32N uses GRS80: differs from WGS 84 / UTM 32N by far less than 1 mm (f differs by 1.6e-11 relative).
    const [etrsE] = transform('EPSG:4258', 'EPSG:25832', [7.4, 52.3]);
    expect(Math.abs(etrsE - 390_898.4597)).toBeLessThan(0.001);
  });

  it('geographic ↔ geocentric: EPSG 9602 example on WGS 84 (GN 7-2 §4.1.1)', () => {
    const lat = dms(53, 48, 33.82);
    const lon = dms(2, 7, 46.38);
    const p = geodeticToGeocentric(lat, lon, 73, WGS84_ELLIPSOID);
    expect(p.x).toBeCloseTo(3_771_793.968, 3);
    expect(p.y).toBeCloseTo(140_253.342, 3);
    expect(p.z).toBeCloseTo(5_124_304.349, 3);
    const [x, y, z] = transform('EPSG:4979', 'EPSG:4978', [lon, lat, 73]);
    expect(Math.hypot(x - p.x, y - p.y, z - p.z)).toBeLessThan(1e-6);
    const back = geocentricToGeodetic({ x: 3_771_793.97, y: 140_253.34, z: 5_124_304.35 }, WGS84_ELLIPSOID);
    // The XYZ are rounded to 1 cm, so the reverse can only return the input point to about 1 cm (1e-7° ≈ 1.1 cm).
    // proj4's reverse agrees with ours (73.0019 m), the 2 mm being the rounding of the published XYZ.
    expect(Math.abs(back.latitudeDeg - lat)).toBeLessThan(1e-7);
    expect(Math.abs(back.longitudeDeg - lon)).toBeLessThan(1e-7);
    expect(Math.abs(back.heightM - 73)).toBeLessThan(0.01);
    const [pLon, pLat, pH] = transform('EPSG:4978', 'EPSG:4979', [3_771_793.97, 140_253.34, 5_124_304.35]);
    expect(back.latitudeDeg).toBeCloseTo(pLat, 10);
    expect(back.longitudeDeg).toBeCloseTo(pLon, 10);
    expect(back.heightM).toBeCloseTo(pH, 6);
  });

  it('GRS80 geocentric checks (EPSG method 9602 with GRS80, computed with mpmath)', () => {
    const eq = geodeticToGeocentric(0, 0, 0);
    expect(eq.x).toBeCloseTo(6_378_137, 6);
    expect(geodeticToGeocentric(90, 0, 0).z).toBeCloseTo(6_356_752.31414, 5);
    const p = geodeticToGeocentric(45, 45, 100);
    expect(p.x).toBeCloseTo(3_194_469.1451, 4);
    expect(p.y).toBeCloseTo(3_194_469.1451, 4);
    expect(p.z).toBeCloseTo(4_487_419.1194, 4);
    const pole = geocentricToGeodetic({ x: 0, y: 0, z: 6_356_752.31414 + 10 });
    expect(pole.latitudeDeg).toBeCloseTo(90, 10);
    expect(pole.heightM).toBeCloseTo(10, 6);
  });

  it('round-trips through projected and geocentric CRSs (common practice)', () => {
    const start = [11.123456789, 48.987654321, 512.345];
    const utm = transform('EPSG:4937', 'EPSG:25832', start);
    expect(utm).toHaveLength(3);
    expect(utm[2]).toBeCloseTo(512.345, 9);
    const back = transform('EPSG:25832', 'EPSG:4937', utm);
    expect(back[0]).toBeCloseTo(start[0], 9);
    expect(back[1]).toBeCloseTo(start[1], 9);
    const xyz = transform('EPSG:7912', 'EPSG:9988', start);
    const geo = transform('EPSG:9988', 'EPSG:4937', xyz);
    expect(geo[2]).toBeCloseTo(start[2], 6);
    for (let lat = -89; lat <= 89; lat += 11) {
      const q = geodeticToGeocentric(lat, 33, 1234.5);
      const r = geocentricToGeodetic(q);
      expect(r.latitudeDeg).toBeCloseTo(lat, 11);
      expect(r.heightM).toBeCloseTo(1234.5, 6);
    }
  });

  it('toGrs80Geodetic states its frame assumption and returns XYZ', () => {
    const r = toGrs80Geodetic('EPSG:32632', [602_283.0987, 5_795_465.3821]);
    expect(r.latitudeDeg).toBeCloseTo(52.3, 8);
    expect(r.longitudeDeg).toBeCloseTo(10.5, 8);
    expect(r.ellipsoidalHeightM).toBe(0);
    expect(r.assumptions.join(' ')).toMatch(/coincident/);
    expect(r.assumptions.join(' ')).toMatch(/no epoch or plate-motion/);
    const g = geodeticToGeocentric(r.latitudeDeg, r.longitudeDeg, 0);
    expect(r.x).toBeCloseTo(g.x, 6);
  });

  it('rejects unknown CRSs with a typed error', () => {
    expect(() => transform('EPSG:9999999', 'EPSG:4326', [0, 0])).toThrow(ScienceInputError);
    expect(() => transform('EPSG:4326', 'EPSG:4978', [0, Number.NaN])).toThrow(ScienceInputError);
  });
});

describe('geodesics (Karney 2013, J Geod 87:43; values computed with the GeographicLib Python reference implementation, WGS 84)', () => {
  it('short inverse case', () => {
    const r = geodesicInverse({ latitudeDeg: -30.12345, longitudeDeg: 0 }, { latitudeDeg: -30.12344, longitudeDeg: 0.00005 }, WGS84_ELLIPSOID);
    expect(Math.abs(r.distanceM - 4.944208284)).toBeLessThan(1e-9);
    expect(r.azimuth1Deg).toBeCloseTo(77.04353354, 8);
    expect(r.azimuth2Deg).toBeCloseTo(77.04350845, 8);
  });

  it('near-antipodal inverse case', () => {
    const r = geodesicInverse({ latitudeDeg: -30, longitudeDeg: 0 }, { latitudeDeg: 29.9, longitudeDeg: 179.8 }, WGS84_ELLIPSOID);
    expect(Math.abs(r.distanceM - 19_989_832.82761)).toBeLessThan(1e-6);
    expect(r.azimuth1Deg).toBeCloseTo(161.890524736, 9);
    expect(r.azimuth2Deg).toBeCloseTo(18.090737246, 9);
  });

  it('GeodSolve0 and GeodSolve1 (GeographicLib test suite)', () => {
    const r = geodesicInverse({ latitudeDeg: 40.6, longitudeDeg: -73.8 }, { latitudeDeg: 49.01666667, longitudeDeg: 2.55 }, WGS84_ELLIPSOID);
    expect(Math.abs(r.distanceM - 5_853_226)).toBeLessThan(0.5);
    expect(r.azimuth1Deg).toBeCloseTo(53.47022, 5);
    expect(r.azimuth2Deg).toBeCloseTo(111.59367, 5);
    const d = geodesicDirect({ latitudeDeg: 40.63972222, longitudeDeg: -73.77888889 }, 53.5, 5_850_000, WGS84_ELLIPSOID);
    expect(d.latitudeDeg).toBeCloseTo(49.01467, 5);
    expect(d.longitudeDeg).toBeCloseTo(2.56106, 5);
    expect(d.azimuth2Deg).toBeCloseTo(111.62947, 5);
  });

  it('direct problem of Karney 2013 (φ1 = 40°, α1 = 30°, s = 10 000 km)', () => {
    const d = geodesicDirect({ latitudeDeg: 40, longitudeDeg: 0 }, 30, 10_000_000, WGS84_ELLIPSOID);
    expect(d.latitudeDeg).toBeCloseTo(41.79331020506, 10);
    expect(d.longitudeDeg).toBeCloseTo(137.84490004377, 10);
    expect(d.azimuth2Deg).toBeCloseTo(149.09016931807, 10);
  });

  it('GRS80 default and chord ≤ geodesic; equal for short baselines (geometry)', () => {
    const a = { latitudeDeg: 52.3, longitudeDeg: 7.4, ellipsoidalHeightM: 0 };
    const b = { latitudeDeg: 49.0, longitudeDeg: 8.4, ellipsoidalHeightM: 0 };
    const geodesic = geodesicInverse(a, b).distanceM;
    const chord = chordDistanceM(a, b);
    expect(chord).toBeLessThan(geodesic);
    // Chord vs arc on a sphere of radius R: s − c ≈ s³/(24R²) (common practice), ~ 2 m here.
    const R = 6_371_000;
    expect(geodesic - chord).toBeCloseTo(geodesic ** 3 / (24 * R * R), 0);
    const near = { latitudeDeg: 52.3001, longitudeDeg: 7.4, ellipsoidalHeightM: 0 };
    expect(chordDistanceM(a, near)).toBeCloseTo(geodesicInverse(a, near).distanceM, 6);
    // Pure height difference: chord equals the height difference.
    expect(chordDistanceM(a, { ...a, ellipsoidalHeightM: 600 })).toBeCloseTo(600, 6);
  });
});
