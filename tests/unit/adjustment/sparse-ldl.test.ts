import { describe, expect, it } from 'vitest';
import { Matrix, inverse, solve as denseSolve } from 'ml-matrix';
import { approximateMinimumDegree, naturalOrdering } from '../../../server/science/adjustment/ordering';
import {
  factorize,
  inverseDiagonal,
  inverseEntry,
  selectedInverse,
  SingularMatrixError,
  solve,
  symmetricFromTriplets,
  type SymmetricCsc,
} from '../../../server/science/adjustment/sparse-ldl';
import { mulberry32 } from './network-fixtures';

// Reference: ml-matrix (npm), dense LU solve and inverse, a general linear-algebra library outside this project.

function toDense(a: SymmetricCsc): Matrix {
  const m = Matrix.zeros(a.n, a.n);
  for (let j = 0; j < a.n; j++) for (let p = a.colPtr[j]; p < a.colPtr[j + 1]; p++) m.set(a.rowIdx[p], j, a.values[p]);
  return m;
}

/** Random sparse SPD matrix: graph Laplacian of a random sparse graph plus a positive diagonal. */
function randomSpd(seed: number, n: number, edges: number): SymmetricCsc {
  const rand = mulberry32(seed);
  const r: number[] = [];
  const c: number[] = [];
  const v: number[] = [];
  for (let i = 0; i < n; i++) { r.push(i); c.push(i); v.push(0.1 + rand()); }
  for (let e = 0; e < edges; e++) {
    const i = Math.floor(rand() * n);
    const j = Math.floor(rand() * n);
    if (i === j) continue;
    const w = 0.5 + 2 * rand();
    r.push(i, j, Math.min(i, j)); c.push(i, j, Math.max(i, j)); v.push(w, w, -w);
  }
  return symmetricFromTriplets(n, r, c, v);
}

describe('sparse LDLᵀ against ml-matrix', () => {
  // Classic 4×4 SPD test matrix (tridiagonal 2/−1 Laplacian with Dirichlet ends, common practice), inverse known in closed form:
  // (A⁻¹)_ij = min(i,j)·(n+1−max(i,j))/(n+1) with 1-based i, j (Green's function of the discrete Laplacian).
  it('known SPD tridiagonal matrix: solve and full inverse', () => {
    const n = 4;
    const r: number[] = [];
    const c: number[] = [];
    const v: number[] = [];
    for (let i = 0; i < n; i++) {
      r.push(i); c.push(i); v.push(2);
      if (i + 1 < n) { r.push(i); c.push(i + 1); v.push(-1); }
    }
    const a = symmetricFromTriplets(n, r, c, v);
    const f = factorize(a);
    const b = [1, 2, 3, 4];
    const x = solve(f, b);
    const ref = denseSolve(toDense(a), Matrix.columnVector(b));
    for (let i = 0; i < n; i++) expect(x[i]).toBeCloseTo(ref.get(i, 0), 12);
    const z = selectedInverse(f);
    for (let i = 1; i <= n; i++) {
      expect(inverseEntry(z, i - 1, i - 1)).toBeCloseTo((i * (n + 1 - i)) / (n + 1), 12);
      if (i < n) expect(inverseEntry(z, i - 1, i)).toBeCloseTo((i * (n + 1 - (i + 1))) / (n + 1), 12);
    }
  });

  it.each([1, 2, 3, 4, 5])('random sparse SPD (seed %i): solve, inverse diagonal and pattern entries', (seed) => {
    const n = 60;
    const a = randomSpd(seed, n, 120);
    const dense = toDense(a);
    const denseInv = inverse(dense);
    for (const ordering of [approximateMinimumDegree(a), naturalOrdering(n)]) {
      const f = factorize(a, { ordering });
      const rand = mulberry32(seed + 100);
      const b = Array.from({ length: n }, () => rand() - 0.5);
      const x = solve(f, b);
      const ref = denseSolve(dense, Matrix.columnVector(b));
      for (let i = 0; i < n; i++) expect(Math.abs(x[i] - ref.get(i, 0))).toBeLessThan(1e-10 * (1 + Math.abs(ref.get(i, 0))));
      const z = selectedInverse(f);
      const diag = inverseDiagonal(z);
      for (let i = 0; i < n; i++) expect(Math.abs(diag[i] - denseInv.get(i, i)) / denseInv.get(i, i)).toBeLessThan(1e-10);
      // Every structural non-zero of A lies in the filled pattern, so its inverse entry is available.
      for (let j = 0; j < n; j++) {
        for (let p = a.colPtr[j]; p < a.colPtr[j + 1]; p++) {
          const i = a.rowIdx[p];
          const q = inverseEntry(z, i, j);
          expect(Number.isNaN(q)).toBe(false);
          expect(Math.abs(q - denseInv.get(i, j))).toBeLessThan(1e-10 * Math.abs(denseInv.get(i, i)));
        }
      }
    }
  });

  it('AMD returns a permutation and reduces fill on a 2-D grid Laplacian (George & Liu 1989: natural order fills the band)', () => {
    const side = 30;
    const n = side * side;
    const r: number[] = [];
    const c: number[] = [];
    const v: number[] = [];
    for (let i = 0; i < n; i++) {
      r.push(i); c.push(i); v.push(4.01);
      if ((i % side) + 1 < side) { r.push(i); c.push(i + 1); v.push(-1); }
      if (i + side < n) { r.push(i); c.push(i + side); v.push(-1); }
    }
    const a = symmetricFromTriplets(n, r, c, v);
    const amd = approximateMinimumDegree(a);
    const seen = new Uint8Array(n);
    for (let k = 0; k < n; k++) {
      seen[amd.perm[k]]++;
      expect(amd.inversePerm[amd.perm[k]]).toBe(k);
    }
    expect(seen.every((s) => s === 1)).toBe(true);
    const fillAmd = factorize(a, { ordering: amd }).colPtr[n];
    const fillNatural = factorize(a, { ordering: naturalOrdering(n) }).colPtr[n];
    // Natural (banded) order: about n·side entries; a minimum-degree order is O(n log n) on grids.
    expect(fillNatural).toBeGreaterThan(side * (n - side) * 0.9);
    expect(fillAmd).toBeLessThan(fillNatural / 2);
  });

  it('reports the offending original column of a singular matrix', () => {
    // Laplacian of a path 0–1–2 (rank 2) plus an isolated, well-posed node 3.
    const a = symmetricFromTriplets(4, [0, 0, 1, 1, 2, 3], [0, 1, 1, 2, 2, 3], [1, -1, 2, -1, 1, 5]);
    let caught: unknown;
    try {
      factorize(a, { ordering: naturalOrdering(4) });
    } catch (e) {
      caught = e;
    }
    expect(caught).toBeInstanceOf(SingularMatrixError);
    expect((caught as SingularMatrixError).column).toBe(2);
    // With a permutation the reported column is still in the original numbering.
    const perm = Int32Array.from([2, 3, 1, 0]);
    const inversePerm = new Int32Array(4);
    perm.forEach((p, k) => (inversePerm[p] = k));
    expect(() => factorize(a, { ordering: { perm, inversePerm } })).toThrowError(/column 0/);
  });

  it('rejects an indefinite matrix', () => {
    const a = symmetricFromTriplets(2, [0, 0, 1], [0, 1, 1], [1, 2, 1]);
    expect(() => factorize(a)).toThrow(SingularMatrixError);
  });
});
