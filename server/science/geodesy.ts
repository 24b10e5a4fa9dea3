// Coordinate reference systems and distances: CRS conversions through proj4 (EPSG Guidance Note 7-2 methods:
// 9602 geographic↔geocentric, 9807 transverse Mercator), geodesics on the ellipsoid through geographiclib-geodesic
// (Karney 2013, J Geod 87:43–55), chord distances from geocentric coordinates.

import geodesicLib from 'geographiclib-geodesic';
import proj4 from 'proj4';
import { GRS80_A_M, GRS80_F } from './constants';
import { ScienceInputError } from './errors';

export interface Ellipsoid {
  name: string;
  a: number;
  f: number;
}

export const GRS80_ELLIPSOID: Ellipsoid = { name: 'GRS80', a: GRS80_A_M, f: GRS80_F };
/** WGS 84 (NIMA TR8350.2): a = 6 378 137 m, 1/f = 298.257 223 563. */
export const WGS84_ELLIPSOID: Ellipsoid = { name: 'WGS 84', a: 6_378_137, f: 1 / 298.257223563 };

export type CrsKind = 'geographic2D' | 'geographic3D' | 'geocentric' | 'projected';

export interface CrsEntry {
  code: string;
  label: string;
  kind: CrsKind;
  proj4: string;
}

// ETRS89 and the ITRF realisations are put on GRS80 with a zero datum shift: at this level they are treated as coincident.
const GRS80_GEOG = '+proj=longlat +ellps=GRS80 +towgs84=0,0,0,0,0,0,0 +no_defs';
const GRS80_GEOC = '+proj=geocent +ellps=GRS80 +towgs84=0,0,0,0,0,0,0 +units=m +no_defs';
const WGS84_GEOG = '+proj=longlat +datum=WGS84 +no_defs';
const WGS84_GEOC = '+proj=geocent +datum=WGS84 +units=m +no_defs';

function buildRegistry(): CrsEntry[] {
  const list: CrsEntry[] = [
    { code: 'EPSG:4258', label: 'ETRS89 (geographic 2D)', kind: 'geographic2D', proj4: GRS80_GEOG },
    { code: 'EPSG:4937', label: 'ETRS89 (geographic 3D)', kind: 'geographic3D', proj4: GRS80_GEOG },
    { code: 'EPSG:4936', label: 'ETRS89 (geocentric)', kind: 'geocentric', proj4: GRS80_GEOC },
    { code: 'EPSG:7912', label: 'ITRF2014 (geographic 3D)', kind: 'geographic3D', proj4: GRS80_GEOG },
    { code: 'EPSG:7789', label: 'ITRF2014 (geocentric)', kind: 'geocentric', proj4: GRS80_GEOC },
    { code: 'EPSG:9989', label: 'ITRF2020 (geographic 3D)', kind: 'geographic3D', proj4: GRS80_GEOG },
    { code: 'EPSG:9988', label: 'ITRF2020 (geocentric)', kind: 'geocentric', proj4: GRS80_GEOC },
    { code: 'EPSG:4326', label: 'WGS 84 (geographic 2D)', kind: 'geographic2D', proj4: WGS84_GEOG },
    { code: 'EPSG:4979', label: 'WGS 84 (geographic 3D)', kind: 'geographic3D', proj4: WGS84_GEOG },
    { code: 'EPSG:4978', label: 'WGS 84 (geocentric)', kind: 'geocentric', proj4: WGS84_GEOC },
  ];
  for (let zone = 28; zone <= 38; zone++) {
    list.push({ code: `EPSG:258${zone}`, label: `ETRS89 / UTM zone ${zone}N`, kind: 'projected', proj4: `+proj=utm +zone=${zone} +ellps=GRS80 +towgs84=0,0,0,0,0,0,0 +units=m +no_defs` });
  }
  for (let zone = 1; zone <= 60; zone++) {
    const z = String(zone).padStart(2, '0');
    list.push({ code: `EPSG:326${z}`, label: `WGS 84 / UTM zone ${zone}N`, kind: 'projected', proj4: `+proj=utm +zone=${zone} +datum=WGS84 +units=m +no_defs` });
    list.push({ code: `EPSG:327${z}`, label: `WGS 84 / UTM zone ${zone}S`, kind: 'projected', proj4: `+proj=utm +zone=${zone} +south +datum=WGS84 +units=m +no_defs` });
  }
  return list;
}

const REGISTRY = buildRegistry();
const BY_CODE = new Map(REGISTRY.map((e) => [e.code, e]));

export function listCrs(): CrsEntry[] {
  return REGISTRY.map((e) => ({ ...e }));
}

/** Resolves an EPSG code from the registry or a free PROJ string (+proj=…), which is parsed to check it. */
export function resolveCrs(crs: string, field = 'crs'): CrsEntry {
  const key = crs.trim();
  const known = BY_CODE.get(key.toUpperCase());
  if (known) return known;
  if (!key.startsWith('+proj=')) throw new ScienceInputError(field, `unsupported CRS "${crs}": use a listed EPSG code or a PROJ string starting with +proj=`);
  // Grid shift files (+nadgrids, +geoidgrids, +grids of gridshift steps) name files on the server: refused outright,
  // so no request makes the converter look for a file, and no half-configured conversion runs without its grid.
  if (/\+(nadgrids|geoidgrids|grids|hgridshift|vgridshift)\b/i.test(key)) {
    throw new ScienceInputError(field, 'PROJ strings that name grid files (+nadgrids, +geoidgrids, grid shifts) are not accepted; use a listed EPSG code or a grid-free PROJ string');
  }
  try {
    proj4(key, WGS84_GEOG, [0, 0, 0]);
  } catch {
    throw new ScienceInputError(field, 'PROJ string could not be parsed');
  }
  const proj = /\+proj=(\w+)/.exec(key)?.[1] ?? '';
  const kind: CrsKind = ['longlat', 'latlong', 'lonlat', 'latlon'].includes(proj) ? 'geographic3D' : proj === 'geocent' ? 'geocentric' : 'projected';
  return { code: key, label: `PROJ string (${proj})`, kind, proj4: key };
}

/**
 * Converts one coordinate tuple. Order follows proj4: longitude, latitude (degrees) for geographic CRSs; easting,
 * northing for projected ones; X, Y, Z for geocentric ones. A third value (ellipsoidal height, m) is carried through;
 * a missing height is taken as 0 and the result then has two values unless the target is geocentric.
 */
export function transform(from: string, to: string, coords: readonly number[]): number[] {
  const source = resolveCrs(from, 'from');
  const target = resolveCrs(to, 'to');
  if (coords.length < 2 || coords.length > 3 || coords.some((v) => !Number.isFinite(v))) {
    throw new ScienceInputError('coords', 'must be 2 or 3 finite numbers');
  }
  if (source.kind === 'geocentric' && coords.length !== 3) throw new ScienceInputError('coords', 'geocentric coordinates need X, Y and Z');
  let out: number[];
  try {
    out = proj4(source.proj4, target.proj4, [coords[0], coords[1], coords[2] ?? 0]) as number[];
  } catch (e) {
    throw new ScienceInputError('coords', `the conversion failed for these coordinates (${(e as Error).message})`);
  }
  if (out.some((v) => !Number.isFinite(v))) throw new ScienceInputError('coords', 'outside the domain of the conversion');
  return coords.length === 2 && target.kind !== 'geocentric' ? out.slice(0, 2) : out.slice(0, 3);
}

const DEG = Math.PI / 180;

export interface Geocentric {
  x: number;
  y: number;
  z: number;
}

/** EPSG method 9602 (GN 7-2 §4.1.1): X = (ν+h)cosφcosλ, Y = (ν+h)cosφsinλ, Z = ((1−e²)ν+h)sinφ. */
export function geodeticToGeocentric(latDeg: number, lonDeg: number, heightM: number, ellipsoid: Ellipsoid = GRS80_ELLIPSOID): Geocentric {
  const e2 = ellipsoid.f * (2 - ellipsoid.f);
  const phi = latDeg * DEG;
  const lam = lonDeg * DEG;
  const sinPhi = Math.sin(phi);
  const nu = ellipsoid.a / Math.sqrt(1 - e2 * sinPhi * sinPhi);
  return {
    x: (nu + heightM) * Math.cos(phi) * Math.cos(lam),
    y: (nu + heightM) * Math.cos(phi) * Math.sin(lam),
    z: ((1 - e2) * nu + heightM) * sinPhi,
  };
}

/** Inverse of method 9602 by Bowring's (1976) starting value and a few fixed-point refinements (sub-µm). */
export function geocentricToGeodetic(p: Geocentric, ellipsoid: Ellipsoid = GRS80_ELLIPSOID): { latitudeDeg: number; longitudeDeg: number; heightM: number } {
  const { a, f } = ellipsoid;
  const e2 = f * (2 - f);
  const b = a * (1 - f);
  const ep2 = e2 / (1 - e2);
  const rho = Math.hypot(p.x, p.y);
  const lon = Math.atan2(p.y, p.x);
  const theta = Math.atan2(p.z * a, rho * b);
  let phi = Math.atan2(p.z + ep2 * b * Math.sin(theta) ** 3, rho - e2 * a * Math.cos(theta) ** 3);
  let h = 0;
  for (let i = 0; i < 3; i++) {
    const sinPhi = Math.sin(phi);
    const nu = a / Math.sqrt(1 - e2 * sinPhi * sinPhi);
    h = Math.abs(Math.cos(phi)) > 1e-10 ? rho / Math.cos(phi) - nu : Math.abs(p.z) / Math.abs(sinPhi) - nu * (1 - e2);
    phi = Math.atan2(p.z, rho * (1 - (e2 * nu) / (nu + h)));
  }
  return { latitudeDeg: phi / DEG, longitudeDeg: lon / DEG, heightM: h };
}

export interface Grs80Position {
  latitudeDeg: number;
  longitudeDeg: number;
  ellipsoidalHeightM: number;
  x: number;
  y: number;
  z: number;
  assumptions: string[];
}

const COINCIDENT_FRAMES =
  'ETRS89, ITRF2014, ITRF2020 and WGS 84 are treated as coincident (zero datum shift); no epoch or plate-motion transformation is applied, which can differ by several decimetres between ETRS89 and ITRF today.';

/** Any supported CRS to geodetic latitude, longitude, ellipsoidal height on GRS80 and geocentric XYZ. */
export function toGrs80Geodetic(crs: string, coords: readonly number[]): Grs80Position {
  const entry = resolveCrs(crs);
  const assumptions = [COINCIDENT_FRAMES];
  if (coords.length === 2 && entry.kind !== 'geocentric') assumptions.push('No height given: ellipsoidal height taken as 0 m.');
  if (entry.code.startsWith('+proj=')) assumptions.push('Free PROJ string: its datum is taken as given by the string; without +towgs84 no datum shift is applied.');
  const [lon, lat, h] = transform(entry.code, 'EPSG:4937', coords.length === 2 && entry.kind !== 'geocentric' ? [coords[0], coords[1], 0] : coords);
  const xyz = geodeticToGeocentric(lat, lon, h);
  return { latitudeDeg: lat, longitudeDeg: lon, ellipsoidalHeightM: h, ...xyz, assumptions };
}

export interface GeodeticPoint {
  latitudeDeg: number;
  longitudeDeg: number;
  ellipsoidalHeightM?: number;
}

export interface GeodesicInverseResult {
  distanceM: number;
  /** Forward azimuth at the first point, degrees clockwise from north. */
  azimuth1Deg: number;
  /** Forward azimuth at the second point (direction of travel), degrees. */
  azimuth2Deg: number;
}

function geodesicFor(ellipsoid: Ellipsoid) {
  return new geodesicLib.Geodesic.Geodesic(ellipsoid.a, ellipsoid.f);
}

/** Shortest geodesic on the ellipsoid (GRS80 by default). */
export function geodesicInverse(a: GeodeticPoint, b: GeodeticPoint, ellipsoid: Ellipsoid = GRS80_ELLIPSOID): GeodesicInverseResult {
  const r = geodesicFor(ellipsoid).Inverse(a.latitudeDeg, a.longitudeDeg, b.latitudeDeg, b.longitudeDeg);
  return { distanceM: r.s12 as number, azimuth1Deg: r.azi1 as number, azimuth2Deg: r.azi2 as number };
}

/** Point reached from `start` along azimuth for a distance (used for checks and demo geometry). */
export function geodesicDirect(start: GeodeticPoint, azimuthDeg: number, distanceM: number, ellipsoid: Ellipsoid = GRS80_ELLIPSOID): { latitudeDeg: number; longitudeDeg: number; azimuth2Deg: number } {
  const r = geodesicFor(ellipsoid).Direct(start.latitudeDeg, start.longitudeDeg, azimuthDeg, distanceM);
  return { latitudeDeg: r.lat2 as number, longitudeDeg: r.lon2 as number, azimuth2Deg: r.azi2 as number };
}

/** Straight-line (chord) distance between two points from their geocentric coordinates, heights included. */
export function chordDistanceM(a: GeodeticPoint, b: GeodeticPoint, ellipsoid: Ellipsoid = GRS80_ELLIPSOID): number {
  const p = geodeticToGeocentric(a.latitudeDeg, a.longitudeDeg, a.ellipsoidalHeightM ?? 0, ellipsoid);
  const q = geodeticToGeocentric(b.latitudeDeg, b.longitudeDeg, b.ellipsoidalHeightM ?? 0, ellipsoid);
  return Math.hypot(p.x - q.x, p.y - q.y, p.z - q.z);
}
