// Quasigeoid heights ζ from a regular latitude/longitude grid by bilinear interpolation inside one grid cell
// (Press et al., Numerical Recipes, 3rd ed., 2007, §3.6 "Interpolation on a grid in multidimensions" — section
// number from memory; using it for gridded (quasi)geoid models is common practice). File layout: docs/formats/quasigeoid-grid.md.

import { ScienceInputError } from './errors';

export interface QuasigeoidGridData {
  latitudeMinDeg: number;
  longitudeMinDeg: number;
  latitudeStepDeg: number;
  longitudeStepDeg: number;
  latitudeCount: number;
  longitudeCount: number;
  /** Row-major: index = iLat · longitudeCount + iLon, latitude and longitude ascending. */
  heightsM: ArrayLike<number>;
}

/** A malformed grid file: names the line (1-based) at fault. */
export class GridFormatError extends ScienceInputError {
  constructor(readonly line: number | null, message: string) {
    super(line === null ? 'content' : `content line ${line}`, message);
  }
}

const NUMBER = /^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$/;
// Relative tolerance on node spacing: grid files print coordinates with finite decimals.
const SPACING_TOLERANCE = 1e-6;

function axisOf(values: number[], name: string): { min: number; step: number; count: number } {
  const sorted = [...new Set(values)].sort((a, b) => a - b);
  if (sorted.length < 2) throw new GridFormatError(null, `the grid needs at least two distinct ${name} values`);
  const step = (sorted[sorted.length - 1] - sorted[0]) / (sorted.length - 1);
  for (let i = 1; i < sorted.length; i++) {
    if (Math.abs(sorted[i] - sorted[i - 1] - step) > SPACING_TOLERANCE * step) {
      throw new GridFormatError(null, `${name} values are not regularly spaced (gap after ${sorted[i - 1]}°)`);
    }
  }
  return { min: sorted[0], step, count: sorted.length };
}

/** Parses `# comment` lines and `latitude longitude height` rows (degrees, degrees, metres) into a full regular grid. */
export function parseQuasigeoidGrid(text: string): QuasigeoidGridData {
  const lats: number[] = [];
  const lons: number[] = [];
  const heights: number[] = [];
  const lineOf: number[] = [];
  text.split(/\r?\n/).forEach((raw, i) => {
    const line = raw.trim();
    if (line === '' || line.startsWith('#')) return;
    const parts = line.split(/\s+/);
    if (parts.length !== 3) throw new GridFormatError(i + 1, `expected 3 values "latitude longitude height", found ${parts.length}`);
    parts.forEach((p, k) => {
      if (!NUMBER.test(p)) throw new GridFormatError(i + 1, `${['latitude', 'longitude', 'height'][k]} "${p}" is not a number`);
    });
    const [lat, lon, h] = parts.map(Number);
    if (lat < -90 || lat > 90) throw new GridFormatError(i + 1, 'latitude outside −90…90°');
    if (lon < -180 || lon > 360) throw new GridFormatError(i + 1, 'longitude outside −180…360°');
    if (Math.abs(h) > 200) throw new GridFormatError(i + 1, 'quasigeoid height beyond ±200 m');
    lats.push(lat);
    lons.push(lon);
    heights.push(h);
    lineOf.push(i + 1);
  });
  if (heights.length === 0) throw new GridFormatError(null, 'no data rows');
  const la = axisOf(lats, 'latitude');
  const lo = axisOf(lons, 'longitude');
  const grid = new Float64Array(la.count * lo.count).fill(Number.NaN);
  for (let n = 0; n < heights.length; n++) {
    const iLat = Math.round((lats[n] - la.min) / la.step);
    const iLon = Math.round((lons[n] - lo.min) / lo.step);
    const k = iLat * lo.count + iLon;
    if (!Number.isNaN(grid[k])) throw new GridFormatError(lineOf[n], `node ${lats[n]}°, ${lons[n]}° appears twice`);
    grid[k] = heights[n];
  }
  const missing = grid.findIndex((v) => Number.isNaN(v));
  if (missing >= 0) {
    const lat = la.min + Math.floor(missing / lo.count) * la.step;
    const lon = lo.min + (missing % lo.count) * lo.step;
    throw new GridFormatError(null, `node ${lat.toFixed(6)}°, ${lon.toFixed(6)}° is missing: the grid must be complete`);
  }
  return {
    latitudeMinDeg: la.min,
    longitudeMinDeg: lo.min,
    latitudeStepDeg: la.step,
    longitudeStepDeg: lo.step,
    latitudeCount: la.count,
    longitudeCount: lo.count,
    heightsM: Array.from(grid),
  };
}

/** Bilinear interpolation of ζ at (latitudeDeg, longitudeDeg); a point outside the grid is an error, never extrapolated. */
export function interpolateQuasigeoidHeight(grid: QuasigeoidGridData, latitudeDeg: number, longitudeDeg: number): number {
  const u = (latitudeDeg - grid.latitudeMinDeg) / grid.latitudeStepDeg;
  const v = (longitudeDeg - grid.longitudeMinDeg) / grid.longitudeStepDeg;
  const eps = 1e-9;
  if (!(u >= -eps && u <= grid.latitudeCount - 1 + eps && v >= -eps && v <= grid.longitudeCount - 1 + eps)) {
    const latMax = grid.latitudeMinDeg + (grid.latitudeCount - 1) * grid.latitudeStepDeg;
    const lonMax = grid.longitudeMinDeg + (grid.longitudeCount - 1) * grid.longitudeStepDeg;
    throw new ScienceInputError(
      'position',
      `${latitudeDeg.toFixed(6)}°, ${longitudeDeg.toFixed(6)}° lies outside the grid (latitude ${grid.latitudeMinDeg}…${latMax}°, longitude ${grid.longitudeMinDeg}…${lonMax}°)`,
    );
  }
  // Points on the last row or column use the cell below/left of them so that i+1 stays inside.
  const i = Math.min(Math.max(Math.floor(u), 0), grid.latitudeCount - 2);
  const j = Math.min(Math.max(Math.floor(v), 0), grid.longitudeCount - 2);
  const t = u - i;
  const s = v - j;
  const at = (a: number, b: number) => grid.heightsM[a * grid.longitudeCount + b];
  return (1 - t) * (1 - s) * at(i, j) + (1 - t) * s * at(i, j + 1) + t * (1 - s) * at(i + 1, j) + t * s * at(i + 1, j + 1);
}
