import { describe, expect, it } from 'vitest';
import { ScienceInputError } from '../../../server/science/errors';
import { GridFormatError, interpolateQuasigeoidHeight, parseQuasigeoidGrid } from '../../../server/science/quasigeoid-grid';

// Bilinear interpolation f = (1−t)(1−s)f00 + (1−t)s f01 + t(1−s) f10 + ts f11 (Numerical Recipes 3rd ed. §3.6,
// section number from memory). Its exactness for functions a + b·φ + c·λ + d·φλ is a mathematical identity of the
// formula (common practice to test it that way); no outside table is needed for it.

function gridText(f: (lat: number, lon: number) => number, lats: number[], lons: number[], shuffle = false): string {
  const rows: string[] = ['# invented test grid', '# latitude longitude height'];
  for (const la of lats) for (const lo of lons) rows.push(`${la} ${lo} ${f(la, lo).toFixed(9)}`);
  if (shuffle) rows.reverse();
  return rows.join('\n');
}
const range = (from: number, step: number, n: number) => Array.from({ length: n }, (_, i) => +(from + i * step).toFixed(6));

describe('bilinear quasigeoid interpolation', () => {
  const plane = (lat: number, lon: number) => 40 + 1.25 * (lat - 54) - 0.8 * (lon - 10);
  const grid = parseQuasigeoidGrid(gridText(plane, range(53, 0.25, 9), range(9, 0.5, 7)));

  it('reproduces a plane exactly anywhere inside the grid (identity of the bilinear formula)', () => {
    for (const [lat, lon] of [[54.2, 10.9], [53.0001, 9.0001], [54.99, 11.99], [53.6180339, 10.31415]]) {
      expect(interpolateQuasigeoidHeight(grid, lat, lon)).toBeCloseTo(plane(lat, lon), 9);
    }
  });

  it('reproduces the bilinear term φ·λ exactly as well, and node values at nodes', () => {
    const saddle = (lat: number, lon: number) => 0.3 * (lat - 53) * (lon - 9) + 35;
    const g = parseQuasigeoidGrid(gridText(saddle, range(53, 0.25, 5), range(9, 0.5, 5), true));
    expect(interpolateQuasigeoidHeight(g, 53.6, 10.3)).toBeCloseTo(saddle(53.6, 10.3), 9);
    expect(interpolateQuasigeoidHeight(g, 54, 11)).toBeCloseTo(saddle(54, 11), 9);
  });

  it('accepts the upper and right edges and rejects points outside with a clear error', () => {
    expect(interpolateQuasigeoidHeight(grid, 55, 12)).toBeCloseTo(plane(55, 12), 9);
    expect(() => interpolateQuasigeoidHeight(grid, 55.01, 10)).toThrow(ScienceInputError);
    expect(() => interpolateQuasigeoidHeight(grid, 54, 8.9)).toThrow(/outside the grid/);
  });

  it('reads grid geometry from the file', () => {
    expect(grid).toMatchObject({ latitudeMinDeg: 53, longitudeMinDeg: 9, latitudeCount: 9, longitudeCount: 7 });
    expect(grid.latitudeStepDeg).toBeCloseTo(0.25, 12);
    expect(grid.longitudeStepDeg).toBeCloseTo(0.5, 12);
  });
});

describe('grid file checks', () => {
  it('names the line of a malformed row', () => {
    const bad = '# c\n54 10 40\n54 10.5 forty\n';
    expect(() => parseQuasigeoidGrid(bad)).toThrow(GridFormatError);
    try {
      parseQuasigeoidGrid(bad);
    } catch (e) {
      expect((e as GridFormatError).line).toBe(3);
    }
  });

  it('refuses irregular spacing, duplicates and holes', () => {
    expect(() => parseQuasigeoidGrid('54 10 1\n54 10.5 1\n54 11.5 1\n55 10 1\n55 10.5 1\n55 11.5 1')).toThrow(/regularly spaced/);
    expect(() => parseQuasigeoidGrid('54 10 1\n54 11 1\n55 10 1\n55 11 1\n55 11 2')).toThrow(/twice/);
    expect(() => parseQuasigeoidGrid('54 10 1\n54 11 1\n55 10 1')).toThrow(/missing/);
  });
});
