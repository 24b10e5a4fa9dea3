import { describe, expect, it } from 'vitest';
import { Matrix, inverse, solve as denseSolve } from 'ml-matrix';
import { approximateMinimumDegree, naturalOrdering, type Ordering } from '../../../server/science/adjustment/ordering';
import {
  factorize,
  factorizeByRows,
  fundamentalSupernodes,
  SingularMatrixError,
  inverseEntry,
  selectedInverse,
  solve,
  symmetricFromTriplets,
  type SymmetricCsc,
} from '../../../server/science/adjustment/sparse-ldl';
import { mulberry32 } from './network-fixtures';

// Factorisation, solve and selected inversion work on supernodes (dense panels and blocks); every result must equal
// the dense inverse or solution and the row-by-row factorisation. Factorisation: Ng & Peyton, SIAM J. Sci. Comput.
// 14(5), 1993 (left-looking supernodal); row-by-row reference: Davis, ACM TOMS 31(4), 2005. Selected inversion:
// Takahashi, Fagan & Chin, PICA 1973 (Z = A⁻¹ on the pattern of L); supernodes: Liu, Ng & Peyton, SIAM J. Matrix Anal.
// Appl. 14(1), 1993. Dense reference: ml-matrix (npm), a general linear-algebra library outside this project;
// agreement to 1e-10 relative (1e-12 between the two factorisations) is common practice for double-precision solvers
// on well-conditioned matrices (Golub & Van Loan, Matrix Computations, 4th ed., §4.2 for the rounding of LDLᵀ).

/** Weighted Laplacian of a jittered grid with diagonals plus a small positive diagonal (a levelling-like SPD matrix). */
function gridSpd(seed: number, side: number, extraLinks: number): SymmetricCsc {
  const rand = mulberry32(seed);
  const n = side * side;
  const r: number[] = [];
  const c: number[] = [];
  const v: number[] = [];
  const link = (i: number, j: number): void => {
    const w = 0.2 + 3 * rand();
    r.push(i, j, Math.min(i, j));
    c.push(i, j, Math.max(i, j));
    v.push(w, w, -w);
  };
  for (let i = 0; i < n; i++) {
    r.push(i);
    c.push(i);
    v.push(0.01 + 0.05 * rand());
    const x = i % side;
    if (x + 1 < side) link(i, i + 1);
    if (i + side < n) link(i, i + side);
    if (x + 1 < side && i + side + 1 < n && rand() < 0.5) link(i, i + side + 1);
  }
  for (let e = 0; e < extraLinks; e++) {
    const i = Math.floor(rand() * n);
    const j = Math.floor(rand() * n);
    if (i !== j) link(i, j);
  }
  return symmetricFromTriplets(n, r, c, v);
}

function toDense(a: SymmetricCsc): Matrix {
  const m = Matrix.zeros(a.n, a.n);
  for (let j = 0; j < a.n; j++) for (let p = a.colPtr[j]; p < a.colPtr[j + 1]; p++) m.set(a.rowIdx[p], j, a.values[p]);
  return m;
}

function widestSupernode(starts: Int32Array): number {
  let w = 0;
  for (let s = 0; s + 1 < starts.length; s++) w = Math.max(w, starts[s + 1] - starts[s]);
  return w;
}

describe('supernodal factorisation, solve and selected inversion against dense and row-by-row references', () => {
  const cases: [string, number, number, number][] = [
    ['grid 14×14, minimum degree', 11, 14, 3],
    ['grid 17×17, minimum degree, long links', 12, 17, 12],
    ['grid 12×12, natural (banded) order', 13, 12, 0],
  ];
  it.each(cases)('%s: every entry on the filled pattern and the diagonal', (label, seed, side, links) => {
    const a = gridSpd(seed, side, links);
    const n = a.n;
    const ordering: Ordering = label.includes('natural') ? naturalOrdering(n) : approximateMinimumDegree(a);
    const f = factorize(a, { ordering });
    const starts = fundamentalSupernodes(f);
    // The blocks (and the four-column sweeps inside them) are exercised: supernodes wider than four columns exist.
    expect(widestSupernode(starts)).toBeGreaterThan(4);
    const denseInv = inverse(toDense(a));
    // Default blocks, then blocks limited to 64 entries (long columns of a supernode then go one by one, the
    // short ones through small blocks), then no blocks at all.
    for (const limit of [undefined, 64, 0]) {
      const z = selectedInverse(f, undefined, limit);
      let worst = 0;
      for (let jp = 0; jp < n; jp++) {
        const j = ordering.perm[jp];
        const dj = denseInv.get(j, j);
        worst = Math.max(worst, Math.abs(inverseEntry(z, j, j) - dj) / dj);
        for (let p = f.colPtr[jp]; p < f.colPtr[jp + 1]; p++) {
          const i = ordering.perm[f.rowIdx[p]];
          const q = inverseEntry(z, i, j);
          worst = Math.max(worst, Math.abs(q - denseInv.get(i, j)) / Math.sqrt(dj * denseInv.get(i, i)));
        }
      }
      expect(worst).toBeLessThan(1e-10);
    }
  });

  it.each(cases)('%s: solve (backward sweep by supernodes) equals the dense solution', (label, seed, side, links) => {
    const a = gridSpd(seed, side, links);
    const n = a.n;
    const ordering: Ordering = label.includes('natural') ? naturalOrdering(n) : approximateMinimumDegree(a);
    const f = factorize(a, { ordering });
    const rand = mulberry32(seed + 7);
    // A dense right-hand side and one with two non-zeros (as for an observation row a = e_to − e_from).
    const dense = Array.from({ length: n }, () => rand() - 0.5);
    const two = new Array<number>(n).fill(0);
    two[Math.floor(rand() * n)] += 1;
    two[Math.floor(rand() * n)] -= 1;
    for (const b of [dense, two]) {
      const x = solve(f, b);
      const ref = denseSolve(toDense(a), Matrix.columnVector(b));
      let scale = 0;
      for (let i = 0; i < n; i++) scale = Math.max(scale, Math.abs(ref.get(i, 0)));
      for (let i = 0; i < n; i++) expect(Math.abs(x[i] - ref.get(i, 0))).toBeLessThan(1e-10 * scale);
    }
  });

  it.each(cases)('%s: supernodal LDLᵀ has the row-by-row pattern and values, also with narrow panels', (label, seed, side, links) => {
    const a = gridSpd(seed, side, links);
    const n = a.n;
    const ordering: Ordering = label.includes('natural') ? naturalOrdering(n) : approximateMinimumDegree(a);
    const ref = factorizeByRows(a, { ordering });
    for (const maxPanelEntries of [undefined, 40, 1]) {
      const f = factorize(a, { ordering, maxPanelEntries });
      expect(Array.from(f.colPtr)).toEqual(Array.from(ref.colPtr));
      expect(Array.from(f.rowIdx)).toEqual(Array.from(ref.rowIdx));
      for (let j = 0; j < n; j++) expect(Math.abs(f.diag[j] - ref.diag[j])).toBeLessThan(1e-12 * ref.diag[j]);
      // |L_ij|·√(d_j) is bounded by √(a_ii) (A = L D Lᵀ), so an absolute bound on that scale.
      for (let j = 0; j < n; j++) {
        for (let p = ref.colPtr[j]; p < ref.colPtr[j + 1]; p++) {
          expect(Math.abs(f.values[p] - ref.values[p]) * Math.sqrt(ref.diag[j])).toBeLessThan(1e-12 * 10);
        }
      }
    }
  });

  it('a singular part is reported at the same original column as the row-by-row factorisation', () => {
    // Two grids side by side: the first with a positive diagonal, the second a pure Laplacian (rank defect 1, common
    // practice: a connected graph Laplacian has the constant vector as null space).
    const g = gridSpd(31, 8, 2);
    const n1 = g.n;
    const side = 7;
    const r: number[] = [];
    const c: number[] = [];
    const v: number[] = [];
    for (let j = 0; j < n1; j++) for (let p = g.colPtr[j]; p < g.colPtr[j + 1]; p++) if (g.rowIdx[p] <= j) { r.push(g.rowIdx[p]); c.push(j); v.push(g.values[p]); }
    for (let i = 0; i < side * side; i++) {
      const x = i % side;
      const link = (q: number): void => {
        r.push(n1 + i, n1 + q, n1 + i);
        c.push(n1 + i, n1 + q, n1 + q);
        v.push(1, 1, -1);
      };
      if (x + 1 < side) link(i + 1);
      if (i + side < side * side) link(i + side);
    }
    const a = symmetricFromTriplets(n1 + side * side, r, c, v);
    for (const ordering of [approximateMinimumDegree(a), naturalOrdering(a.n)]) {
      let byRows: unknown;
      let bySupernodes: unknown;
      try { factorizeByRows(a, { ordering }); } catch (e) { byRows = e; }
      try { factorize(a, { ordering }); } catch (e) { bySupernodes = e; }
      expect(byRows).toBeInstanceOf(SingularMatrixError);
      expect(bySupernodes).toBeInstanceOf(SingularMatrixError);
      expect((bySupernodes as SingularMatrixError).column).toBe((byRows as SingularMatrixError).column);
      expect((bySupernodes as SingularMatrixError).column).toBeGreaterThanOrEqual(n1);
    }
  });

  it('supernodes partition the columns; inside one, column j has the rows j + 1 … end and then the last column’s rows', () => {
    const a = gridSpd(21, 15, 5);
    const f = factorize(a);
    const starts = fundamentalSupernodes(f);
    expect(starts[0]).toBe(0);
    expect(starts[starts.length - 1]).toBe(a.n);
    for (let s = 0; s + 1 < starts.length; s++) {
      const e = starts[s + 1] - 1;
      expect(starts[s + 1]).toBeGreaterThan(starts[s]);
      const tail = Array.from(f.rowIdx.subarray(f.colPtr[e], f.colPtr[e + 1]));
      for (let j = starts[s]; j < e; j++) {
        const rows = Array.from(f.rowIdx.subarray(f.colPtr[j], f.colPtr[j + 1]));
        const expected = [...Array.from({ length: e - j }, (_, q) => j + 1 + q), ...tail];
        expect(rows).toEqual(expected);
      }
    }
  });
});
