// Sparse symmetric LDLᵀ factorisation (up-looking, row by row via the elimination tree) and selected inversion.
// Factorisation: T. A. Davis, "Algorithm 849: A concise sparse Cholesky factorization package", ACM TOMS 31(4), 2005,
// and Davis, "Direct Methods for Sparse Linear Systems", SIAM 2006, ch. 4. Selected inversion: K. Takahashi, J. Fagan,
// M.-S. Chen, "Formation of a sparse bus impedance matrix and its application to short circuit study", PICA 1973.

import { approximateMinimumDegree, type Ordering, type SymmetricPattern } from './ordering';

/** Symmetric matrix in CSC form holding BOTH triangles (rows sorted or not, no duplicates). */
export interface SymmetricCsc extends SymmetricPattern {
  values: Float64Array;
}

export class SingularMatrixError extends Error {
  /** Original (unpermuted) column index whose pivot vanished or went negative. */
  readonly column: number;
  readonly pivot: number;
  constructor(column: number, pivot: number) {
    super(`matrix is singular or not positive definite at column ${column} (pivot ${pivot})`);
    this.name = 'SingularMatrixError';
    this.column = column;
    this.pivot = pivot;
  }
}

/**
 * L (unit lower, strict part stored by columns of the PERMUTED matrix, rows ascending) and D,
 * so that P A Pᵀ = L D Lᵀ with perm[k] = original index of permuted row/column k.
 */
export interface LdlFactor {
  n: number;
  ordering: Ordering;
  parent: Int32Array;
  colPtr: Int32Array;
  rowIdx: Int32Array;
  values: Float64Array;
  diag: Float64Array;
}

/**
 * Relative pivot threshold: a pivot d_k ≤ tol·a_kk means the column is (numerically) a combination of
 * earlier ones. For a datum defect the exact pivot is 0 and rounding leaves about 1e-16·a_kk; genuine
 * pivots of a levelling network stay many orders above 1e-12·a_kk unless weights differ by ~1e12
 * (common practice for rank detection in LDLᵀ of normal equations).
 */
export const DEFAULT_PIVOT_TOLERANCE = 1e-12;

/** Called now and then with the share of the work done (0..1), for progress reports; must not throw. */
export type ColumnProgress = (fraction: number) => void;
/** Progress is reported every PROGRESS_MASK + 1 columns. */
const PROGRESS_MASK = 255;

/**
 * Work of each column, |L_j|² + 1 (the factorisation and the selected inversion both cost about Σ_j |L_j|²), with the
 * total in the extra last slot: progress fractions then follow the work, not the column count.
 */
function columnWork(colPtr: Int32Array, n: number): Float64Array {
  const w = new Float64Array(n + 1);
  let total = 0;
  for (let j = 0; j < n; j++) {
    const len = colPtr[j + 1] - colPtr[j];
    w[j] = len * len + 1;
    total += w[j];
  }
  w[n] = total;
  return w;
}

export interface FactorOptions {
  ordering?: Ordering;
  pivotTolerance?: number;
  onColumns?: ColumnProgress;
  /** Largest dense panel of factorize, in entries (default MAX_PANEL_ENTRIES); wider supernodes are cut. */
  maxPanelEntries?: number;
}

/** Elimination tree and column counts of L for P A Pᵀ (Davis 2005, ldl_symbolic). */
export function symbolicAnalysis(a: SymmetricPattern, ordering: Ordering): { parent: Int32Array; colPtr: Int32Array } {
  const n = a.n;
  const { perm, inversePerm } = ordering;
  const parent = new Int32Array(n);
  const flag = new Int32Array(n);
  const lnz = new Int32Array(n);
  for (let k = 0; k < n; k++) {
    parent[k] = -1;
    flag[k] = k;
    const kk = perm[k];
    for (let p = a.colPtr[kk]; p < a.colPtr[kk + 1]; p++) {
      let i = inversePerm[a.rowIdx[p]];
      if (i < k) {
        for (; flag[i] !== k; i = parent[i]) {
          if (parent[i] === -1) parent[i] = k;
          lnz[i]++;
          flag[i] = k;
        }
      }
    }
  }
  const colPtr = new Int32Array(n + 1);
  for (let k = 0; k < n; k++) colPtr[k + 1] = colPtr[k] + lnz[k];
  return { parent, colPtr };
}

/** What both factorisations start from: the ordering, the symbolic analysis and the factor's arrays, still empty. */
function prepareFactor(a: SymmetricCsc, options: FactorOptions) {
  const n = a.n;
  const ordering = options.ordering ?? approximateMinimumDegree(a);
  const { parent, colPtr } = symbolicAnalysis(a, ordering);
  const onColumns = options.onColumns;
  const nnz = colPtr[n];
  return {
    n, ordering, parent, colPtr, onColumns,
    tol: options.pivotTolerance ?? DEFAULT_PIVOT_TOLERANCE,
    perm: ordering.perm, inversePerm: ordering.inversePerm,
    weight: onColumns ? columnWork(colPtr, n) : null,
    rowIdx: new Int32Array(nnz), values: new Float64Array(nnz), diag: new Float64Array(n),
  };
}

/**
 * Numeric LDLᵀ row by row (up-looking, Davis 2005), the reference for factorize. Throws SingularMatrixError naming the
 * original column of the first bad pivot.
 */
export function factorizeByRows(a: SymmetricCsc, options: FactorOptions = {}): LdlFactor {
  const { n, ordering, tol, parent, colPtr, perm, inversePerm, onColumns, weight, rowIdx, values, diag } = prepareFactor(a, options);
  let done = 0;
  const y = new Float64Array(n);
  const pattern = new Int32Array(n);
  const flag = new Int32Array(n);
  const lnz = new Int32Array(n);

  for (let k = 0; k < n; k++) {
    y[k] = 0;
    let top = n;
    flag[k] = k;
    lnz[k] = 0;
    const kk = perm[k];
    for (let p = a.colPtr[kk]; p < a.colPtr[kk + 1]; p++) {
      let i = inversePerm[a.rowIdx[p]];
      if (i <= k) {
        y[i] += a.values[p];
        let len = 0;
        for (; flag[i] !== k; i = parent[i]) {
          pattern[len++] = i;
          flag[i] = k;
        }
        while (len > 0) pattern[--top] = pattern[--len];
      }
    }
    const akk = y[k];
    let dk = akk;
    y[k] = 0;
    for (; top < n; top++) {
      const i = pattern[top];
      const yi = y[i];
      y[i] = 0;
      const p2 = colPtr[i] + lnz[i];
      for (let p = colPtr[i]; p < p2; p++) y[rowIdx[p]] -= values[p] * yi;
      const lki = yi / diag[i];
      dk -= lki * yi;
      rowIdx[p2] = k;
      values[p2] = lki;
      lnz[i]++;
    }
    if (!(dk > tol * Math.abs(akk)) || !(akk > 0)) throw new SingularMatrixError(perm[k], dk);
    diag[k] = dk;
    if (weight) {
      // Row k completes the work of every column i < k it touched; the columns' own weights approximate that.
      done += weight[k];
      if ((k & PROGRESS_MASK) === PROGRESS_MASK) onColumns!(done / weight[n]);
    }
  }
  return { n, ordering, parent, colPtr, rowIdx, values, diag };
}

/** A factorisation panel holds at most this many entries (32 MB); wider supernodes are cut into narrower ones. */
export const MAX_PANEL_ENTRIES = 1 << 22;

/**
 * Numeric LDLᵀ by supernodes, left-looking (Ng & Peyton, "Block sparse Cholesky algorithms on advanced uniprocessor
 * computers", SIAM J. Sci. Comput. 14(5), 1993; supernodes: Liu, Ng & Peyton 1993). The pattern of L comes first from the
 * elimination tree (row k of L is the tree reach of row k of A, Davis 2006 §4.1); each supernode J = [j0, j1] with
 * common rows S is then computed in a dense column-major panel of (|J| + |S|) × |J|: the columns of A, the updates of
 * every earlier supernode K with rows in J (L_{R,K}·D_K·L_{U,K}ᵀ, U its rows in J, R its rows from there on), and the
 * dense LDLᵀ of the panel. Same result as factorizeByRows up to rounding; throws SingularMatrixError naming the original
 * column of the first bad pivot, as that one does.
 */
export function factorize(a: SymmetricCsc, options: FactorOptions = {}): LdlFactor {
  const { n, ordering, tol, parent, colPtr, perm, inversePerm, onColumns, weight, rowIdx, values, diag } = prepareFactor(a, options);
  let done = 0;

  // Pattern: row k of L = reach of row k of A in the elimination tree; rows arrive in ascending order per column.
  {
    const flag = new Int32Array(n);
    const fill = colPtr.slice(0, n);
    for (let k = 0; k < n; k++) {
      flag[k] = k;
      const kk = perm[k];
      for (let p = a.colPtr[kk]; p < a.colPtr[kk + 1]; p++) {
        for (let i = inversePerm[a.rowIdx[p]]; i < k && flag[i] !== k; i = parent[i]) {
          rowIdx[fill[i]++] = k;
          flag[i] = k;
        }
      }
    }
  }

  // Supernodes, cut where a panel would grow beyond the limit.
  const maxPanel = options.maxPanelEntries ?? MAX_PANEL_ENTRIES;
  const fundamental = fundamentalSupernodes({ n, colPtr, rowIdx });
  const startList: number[] = [];
  for (let s = 0; s + 1 < fundamental.length; s++) {
    const end = fundamental[s + 1];
    let t = fundamental[s];
    while (t < end) {
      const side = colPtr[t + 1] - colPtr[t] + 1;
      let e = t + 1;
      while (e < end && side * (e + 1 - t) <= maxPanel) e++;
      startList.push(t);
      t = e;
    }
  }
  startList.push(n);
  const starts = Int32Array.from(startList);
  const nSuper = starts.length - 1;
  const superOf = new Int32Array(n);
  for (let s = 0; s < nSuper; s++) for (let j = starts[s]; j < starts[s + 1]; j++) superOf[j] = s;

  // Supernode K waits in the list of the supernode holding its next unused common row; nextRow[K] is that row's offset.
  const head = new Int32Array(nSuper).fill(-1);
  const link = new Int32Array(nSuper).fill(-1);
  const nextRow = new Int32Array(nSuper);
  const rel = new Int32Array(n);
  let panel = new Float64Array(0);
  let tmp = new Float64Array(0);
  let akk = new Float64Array(0);

  for (let sn = 0; sn < nSuper; sn++) {
    const j0 = starts[sn];
    const j1 = starts[sn + 1] - 1;
    const w = j1 - j0 + 1;
    const sp = colPtr[j1];
    const m = colPtr[j1 + 1] - sp;
    const nb = w + m;
    if (panel.length < nb * w) panel = new Float64Array(Math.max(nb * w, 2 * panel.length));
    else panel.fill(0, 0, nb * w);
    if (akk.length < w) akk = new Float64Array(Math.max(w, 2 * akk.length));
    // Local rows: j0 … j1 first, then S (the rows of column j1 below the supernode).
    for (let c = 0; c < w; c++) rel[j0 + c] = c;
    for (let q = 0; q < m; q++) rel[rowIdx[sp + q]] = w + q;

    // Columns of A (lower part, permuted numbering).
    for (let c = 0; c < w; c++) {
      const j = j0 + c;
      const jj = perm[j];
      const base = c * nb;
      for (let p = a.colPtr[jj]; p < a.colPtr[jj + 1]; p++) {
        const i = inversePerm[a.rowIdx[p]];
        if (i >= j) panel[base + rel[i]] += a.values[p];
      }
      akk[c] = panel[base + c];
    }

    // Updates from the earlier supernodes with rows in J.
    let k = head[sn];
    head[sn] = -1;
    while (k !== -1) {
      const nextK = link[k];
      const k0 = starts[k];
      const k1 = starts[k + 1] - 1;
      const wk = k1 - k0 + 1;
      const ks = colPtr[k1]; // common rows of K: rowIdx[ks … ks + mk)
      const mk = colPtr[k1 + 1] - ks;
      const a0 = nextRow[k];
      let a1 = a0;
      while (a1 < mk && rowIdx[ks + a1] <= j1) a1++;
      if (tmp.length < mk) tmp = new Float64Array(Math.max(mk, 2 * tmp.length));
      // Column c' of K holds its common rows from colPtr[k0 + c'] + (wk − 1 − c') on.
      for (let u = a0; u < a1; u++) {
        // tmp[r] = Σ_c' L_{r,c'}·d_c'·L_{u,c'} for the rows r = u … mk − 1 of K.
        for (let r = u; r < mk; r++) tmp[r] = 0;
        let c = 0;
        for (; c + 4 <= wk; c += 4) {
          const b0 = colPtr[k0 + c] + wk - 1 - c;
          const b1 = colPtr[k0 + c + 1] + wk - 2 - c;
          const b2 = colPtr[k0 + c + 2] + wk - 3 - c;
          const b3 = colPtr[k0 + c + 3] + wk - 4 - c;
          const f0 = values[b0 + u] * diag[k0 + c];
          const f1 = values[b1 + u] * diag[k0 + c + 1];
          const f2 = values[b2 + u] * diag[k0 + c + 2];
          const f3 = values[b3 + u] * diag[k0 + c + 3];
          for (let r = u; r < mk; r++) tmp[r] += values[b0 + r] * f0 + values[b1 + r] * f1 + values[b2 + r] * f2 + values[b3 + r] * f3;
        }
        for (; c < wk; c++) {
          const b0 = colPtr[k0 + c] + wk - 1 - c;
          const f0 = values[b0 + u] * diag[k0 + c];
          for (let r = u; r < mk; r++) tmp[r] += values[b0 + r] * f0;
        }
        const base = (rowIdx[ks + u] - j0) * nb;
        for (let r = u; r < mk; r++) panel[base + rel[rowIdx[ks + r]]] -= tmp[r];
      }
      nextRow[k] = a1;
      if (a1 < mk) {
        const target = superOf[rowIdx[ks + a1]];
        link[k] = head[target];
        head[target] = k;
      }
      k = nextK;
    }

    // Dense LDLᵀ of the panel, column by column (left-looking inside the supernode).
    for (let c = 0; c < w; c++) {
      const base = c * nb;
      let cp = 0;
      for (; cp + 4 <= c; cp += 4) {
        const o0 = cp * nb;
        const o1 = o0 + nb;
        const o2 = o1 + nb;
        const o3 = o2 + nb;
        const f0 = panel[o0 + c] * diag[j0 + cp];
        const f1 = panel[o1 + c] * diag[j0 + cp + 1];
        const f2 = panel[o2 + c] * diag[j0 + cp + 2];
        const f3 = panel[o3 + c] * diag[j0 + cp + 3];
        for (let r = c; r < nb; r++) panel[base + r] -= panel[o0 + r] * f0 + panel[o1 + r] * f1 + panel[o2 + r] * f2 + panel[o3 + r] * f3;
      }
      for (; cp < c; cp++) {
        const o0 = cp * nb;
        const f0 = panel[o0 + c] * diag[j0 + cp];
        for (let r = c; r < nb; r++) panel[base + r] -= panel[o0 + r] * f0;
      }
      const j = j0 + c;
      const dk = panel[base + c];
      if (!(dk > tol * Math.abs(akk[c])) || !(akk[c] > 0)) throw new SingularMatrixError(perm[j], dk);
      diag[j] = dk;
      const out = colPtr[j] - c - 1; // local row r (> c) of column j is L entry out + r
      for (let r = c + 1; r < nb; r++) {
        const l = panel[base + r] / dk;
        panel[base + r] = l;
        values[out + r] = l;
      }
      if (weight) {
        done += weight[j];
        if ((j & PROGRESS_MASK) === PROGRESS_MASK) onColumns!(done / weight[n]);
      }
    }
    if (m > 0) {
      nextRow[sn] = 0;
      const target = superOf[rowIdx[sp]];
      link[sn] = head[target];
      head[target] = sn;
    }
  }
  return { n, ordering, parent, colPtr, rowIdx, values, diag };
}

/** Solves A x = b with the factor; b in original ordering, result in original ordering. Both sweeps go by supernodes. */
export function solve(f: LdlFactor, b: ArrayLike<number>): Float64Array {
  const n = f.n;
  const { perm } = f.ordering;
  const { colPtr, rowIdx, values } = f;
  const x = new Float64Array(n);
  for (let k = 0; k < n; k++) x[k] = b[perm[k]];
  const starts = supernodesOf(f);
  let xs = new Float64Array(0);
  // Forward: inside a supernode the columns' leading rows are j + 1 … e (read directly); the common rows S collect
  // the products of all its columns at once (four columns per sweep) and are scattered once.
  for (let sn = 0; sn + 1 < starts.length; sn++) {
    const s0 = starts[sn];
    const e = starts[sn + 1] - 1;
    let any = false;
    for (let j = s0; j <= e; j++) {
      const xj = x[j];
      if (xj === 0) continue;
      any = true;
      const p0 = colPtr[j];
      const inner = e - j;
      for (let q = 0; q < inner; q++) x[j + 1 + q] -= values[p0 + q] * xj;
    }
    if (!any) continue;
    const pe = colPtr[e];
    const m = colPtr[e + 1] - pe;
    if (m === 0) continue;
    if (xs.length < m) xs = new Float64Array(Math.max(m, 2 * xs.length));
    xs.fill(0, 0, m);
    let j = s0;
    for (; j + 4 <= e + 1; j += 4) {
      const q0 = x[j];
      const q1 = x[j + 1];
      const q2 = x[j + 2];
      const q3 = x[j + 3];
      const b0 = colPtr[j] + e - j;
      const b1 = colPtr[j + 1] + e - j - 1;
      const b2 = colPtr[j + 2] + e - j - 2;
      const b3 = colPtr[j + 3] + e - j - 3;
      for (let a = 0; a < m; a++) xs[a] += values[b0 + a] * q0 + values[b1 + a] * q1 + values[b2 + a] * q2 + values[b3 + a] * q3;
    }
    for (; j <= e; j++) {
      const q0 = x[j];
      if (q0 === 0) continue;
      const b0 = colPtr[j] + e - j;
      for (let a = 0; a < m; a++) xs[a] += values[b0 + a] * q0;
    }
    for (let a = 0; a < m; a++) x[rowIdx[pe + a]] -= xs[a];
  }
  for (let j = 0; j < n; j++) x[j] /= f.diag[j];
  // Backward: x on S is gathered once; the products with S of all columns of the supernode first (four columns per
  // sweep of x_S), then the triangle inside the supernode from its last column up.
  let sums = new Float64Array(0);
  for (let sn = starts.length - 2; sn >= 0; sn--) {
    const s0 = starts[sn];
    const e = starts[sn + 1] - 1;
    const w = e - s0 + 1;
    const pe = colPtr[e];
    const m = colPtr[e + 1] - pe;
    if (xs.length < m) xs = new Float64Array(Math.max(m, 2 * xs.length));
    if (sums.length < w) sums = new Float64Array(Math.max(w, 2 * sums.length));
    for (let a = 0; a < m; a++) xs[a] = x[rowIdx[pe + a]];
    let j = s0;
    for (; j + 4 <= e + 1; j += 4) {
      const b0 = colPtr[j] + e - j;
      const b1 = colPtr[j + 1] + e - j - 1;
      const b2 = colPtr[j + 2] + e - j - 2;
      const b3 = colPtr[j + 3] + e - j - 3;
      let t0 = 0;
      let t1 = 0;
      let t2 = 0;
      let t3 = 0;
      for (let a = 0; a < m; a++) {
        const xa = xs[a];
        t0 += values[b0 + a] * xa;
        t1 += values[b1 + a] * xa;
        t2 += values[b2 + a] * xa;
        t3 += values[b3 + a] * xa;
      }
      sums[j - s0] = t0;
      sums[j - s0 + 1] = t1;
      sums[j - s0 + 2] = t2;
      sums[j - s0 + 3] = t3;
    }
    for (; j <= e; j++) {
      const b0 = colPtr[j] + e - j;
      let t0 = 0;
      for (let a = 0; a < m; a++) t0 += values[b0 + a] * xs[a];
      sums[j - s0] = t0;
    }
    for (let jj = e; jj >= s0; jj--) {
      const p0 = colPtr[jj];
      const inner = e - jj; // rows jj + 1 … e come first in column jj, then the common rows
      let s = x[jj] - sums[jj - s0];
      for (let q = 0; q < inner; q++) s -= values[p0 + q] * x[jj + 1 + q];
      x[jj] = s;
    }
  }
  const out = new Float64Array(n);
  for (let k = 0; k < n; k++) out[perm[k]] = x[k];
  return out;
}

const supernodeCache = new WeakMap<LdlFactor, Int32Array>();
/** fundamentalSupernodes of a factor, computed once per factor. */
function supernodesOf(f: LdlFactor): Int32Array {
  let s = supernodeCache.get(f);
  if (!s) {
    s = fundamentalSupernodes(f);
    supernodeCache.set(f, s);
  }
  return s;
}

/**
 * Entries of Z = A⁻¹ on the pattern of L (plus the diagonal), computed backwards with the Takahashi
 * recurrences
 *   Z_ij = −Σ_{k ∈ struct(L_{:,j})} Z_ik L_kj   (i ∈ struct(L_{:,j})),
 *   Z_jj = 1/D_j − Σ_{k ∈ struct(L_{:,j})} L_kj Z_kj.
 * Every Z_ik needed lies in the pattern because struct(L_{:,j}) is a clique of the filled graph.
 */
export interface SelectedInverse {
  factor: LdlFactor;
  /** Z on the strict lower pattern of L (permuted numbering), parallel to factor.values. */
  values: Float64Array;
  /** diag[k] = Z_kk in permuted numbering. */
  diag: Float64Array;
}

/**
 * Fundamental supernodes of L: columns j and j + 1 share one when struct(L_j) = {j + 1} ∪ struct(L_{j+1}) (Liu, Ng &
 * Peyton, "On finding supernodes for sparse matrix computations", SIAM J. Matrix Anal. Appl. 14(1), 1993). Answers the
 * first column of each supernode, then n; the columns of a supernode are consecutive.
 */
export function fundamentalSupernodes(f: Pick<LdlFactor, 'n' | 'colPtr' | 'rowIdx'>): Int32Array {
  const { n, colPtr, rowIdx } = f;
  const starts = new Int32Array(n + 1);
  let count = 0;
  for (let j = 0; j < n; j++) {
    // struct(L_j) \ {first row} ⊆ struct(L_{first row}) (elimination tree): with first row j and one entry more,
    // column j − 1 is {j} ∪ struct(L_j).
    const joinsPrevious = j > 0 && colPtr[j] - colPtr[j - 1] === colPtr[j + 1] - colPtr[j] + 1 && rowIdx[colPtr[j - 1]] === j;
    if (!joinsPrevious) starts[count++] = j;
  }
  starts[count++] = n;
  return starts.slice(0, count);
}

/** A dense block of the selected inversion holds at most this many entries (32 MB); longer columns go one by one. */
export const MAX_INVERSE_BLOCK_ENTRIES = 1 << 22;

export function selectedInverse(f: LdlFactor, onColumns?: ColumnProgress, maxBlockEntries = MAX_INVERSE_BLOCK_ENTRIES): SelectedInverse {
  const n = f.n;
  const { colPtr, rowIdx, values: lx, diag: d } = f;
  const zx = new Float64Array(lx.length);
  const zd = new Float64Array(n);
  const work = new Float64Array(n);
  const weight = columnWork(colPtr, n);
  let done = 0;
  const columnDone = (j: number): void => {
    if (!onColumns) return;
    done += weight[j];
    if ((j & PROGRESS_MASK) === 0) onColumns(done / weight[n]);
  };

  // Position of row i in column k at or after q (row i is known to be there): a galloping search, then bisection.
  const seek = (q: number, qEnd: number, i: number): number => {
    if (rowIdx[q] === i) return q;
    let step = 1;
    let lo = q;
    let hi = q + 1;
    while (hi < qEnd && rowIdx[hi] < i) {
      lo = hi;
      step *= 2;
      hi = q + step;
    }
    if (hi > qEnd) hi = qEnd;
    while (lo < hi) {
      const mid = (lo + hi) >> 1;
      if (rowIdx[mid] < i) lo = mid + 1;
      else hi = mid;
    }
    return lo;
  };

  // One column with the sparse recurrence. Column j's rows r_0 < r_1 < … lie, beyond any r_a, inside column r_a (clique
  // property), so Z_{r_b, r_a} (b > a) is found in column r_a by a galloping search from the previous hit: the work per
  // pair stays near the length of column j instead of the (often far longer) column r_a.
  const sparseColumn = (j: number): void => {
    const p0 = colPtr[j];
    const p1 = colPtr[j + 1];
    for (let p = p0; p < p1; p++) work[rowIdx[p]] = 0;
    for (let a = p0; a < p1; a++) {
      const k = rowIdx[a];
      const lkj = lx[a];
      let accK = zd[k] * lkj;
      let q = colPtr[k];
      const qEnd = colPtr[k + 1];
      for (let b = a + 1; b < p1; b++) {
        const i = rowIdx[b];
        q = seek(q, qEnd, i);
        const zik = zx[q];
        work[i] -= zik * lkj;
        accK += zik * lx[b];
        q++;
      }
      work[k] -= accK;
    }
    let s = 1 / d[j];
    for (let p = p0; p < p1; p++) {
      const i = rowIdx[p];
      zx[p] = work[i];
      s -= lx[p] * work[i];
    }
    zd[j] = s;
  };

  // Inside a supernode J = [t, e] with common rows S (the rows of column e), column j has the rows j + 1 … e followed by
  // S: its recurrence reads Z on (J ∪ S) × (J ∪ S) only. Z_SS is gathered once (one search per entry, from columns
  // already done) into a dense symmetric block, and the columns of J are then computed on that block without searches:
  // local index j − t for column j, |J| + a for S[a].
  let block = new Float64Array(0);
  let lcol = new Float64Array(0);
  let zcol = new Float64Array(0);
  let ys = new Float64Array(0);
  const blockColumns = (t: number, e: number): void => {
    const w = e - t + 1;
    const sp0 = colPtr[e];
    const m = colPtr[e + 1] - sp0;
    const nb = w + m;
    if (block.length < nb * nb) block = new Float64Array(nb * nb);
    if (lcol.length < nb) {
      lcol = new Float64Array(nb);
      zcol = new Float64Array(nb);
    }
    for (let a = 0; a < m; a++) {
      const k = rowIdx[sp0 + a];
      const ra = (w + a) * nb;
      block[ra + w + a] = zd[k];
      let q = colPtr[k];
      const qEnd = colPtr[k + 1];
      for (let b = a + 1; b < m; b++) {
        q = seek(q, qEnd, rowIdx[sp0 + b]);
        const zik = zx[q];
        q++;
        block[ra + w + b] = zik;
        block[(w + b) * nb + w + a] = zik;
      }
    }
    // Y = Z_SS · L_SJ for all columns of J at once, four columns per sweep over Z_SS (rows of L_SJ are contiguous in
    // each column: column t + c holds them from colPtr[t + c] + w − 1 − c on).
    if (ys.length < w * m) ys = new Float64Array(w * m);
    let c = 0;
    for (; c + 4 <= w; c += 4) {
      const l0 = colPtr[t + c] + w - 1 - c;
      const l1 = colPtr[t + c + 1] + w - 2 - c;
      const l2 = colPtr[t + c + 2] + w - 3 - c;
      const l3 = colPtr[t + c + 3] + w - 4 - c;
      for (let a = 0; a < m; a++) {
        const ra = (w + a) * nb + w;
        let y0 = 0;
        let y1 = 0;
        let y2 = 0;
        let y3 = 0;
        for (let k = 0; k < m; k++) {
          const z = block[ra + k];
          y0 += z * lx[l0 + k];
          y1 += z * lx[l1 + k];
          y2 += z * lx[l2 + k];
          y3 += z * lx[l3 + k];
        }
        ys[c * m + a] = y0;
        ys[(c + 1) * m + a] = y1;
        ys[(c + 2) * m + a] = y2;
        ys[(c + 3) * m + a] = y3;
      }
    }
    for (; c < w; c++) {
      const l0 = colPtr[t + c] + w - 1 - c;
      for (let a = 0; a < m; a++) {
        const ra = (w + a) * nb + w;
        let y0 = 0;
        for (let k = 0; k < m; k++) y0 += block[ra + k] * lx[l0 + k];
        ys[c * m + a] = y0;
      }
    }
    for (let j = e; j >= t; j--) {
      const lj = j - t;
      const p0 = colPtr[j] - lj - 1; // L entry of local row i (> lj) at p0 + i
      for (let i = lj + 1; i < nb; i++) lcol[i] = lx[p0 + i];
      let s = 1 / d[j];
      const rj = lj * nb;
      // Rows in J: Z_ij = −Σ_{k > lj} Z_ik L_kj over the whole block row, four rows per sweep of L_j.
      let i = lj + 1;
      for (; i + 4 <= w; i += 4) {
        const r0 = i * nb;
        const r1 = r0 + nb;
        const r2 = r1 + nb;
        const r3 = r2 + nb;
        let a0 = 0;
        let a1 = 0;
        let a2 = 0;
        let a3 = 0;
        for (let k = lj + 1; k < nb; k++) {
          const l = lcol[k];
          a0 += block[r0 + k] * l;
          a1 += block[r1 + k] * l;
          a2 += block[r2 + k] * l;
          a3 += block[r3 + k] * l;
        }
        zcol[i] = -a0;
        zcol[i + 1] = -a1;
        zcol[i + 2] = -a2;
        zcol[i + 3] = -a3;
      }
      for (; i < w; i++) {
        const ri = i * nb;
        let a0 = 0;
        for (let k = lj + 1; k < nb; k++) a0 += block[ri + k] * lcol[k];
        zcol[i] = -a0;
      }
      // Rows in S: Z_Sj = −(Y_j + Z_{S,J>j} L_{J>j,j}), Z_{S,k} read along block row k (k in J, symmetric).
      const yj = lj * m;
      for (let a = 0; a < m; a++) zcol[w + a] = -ys[yj + a];
      let k = lj + 1;
      for (; k + 4 <= w; k += 4) {
        const q0 = lcol[k];
        const q1 = lcol[k + 1];
        const q2 = lcol[k + 2];
        const q3 = lcol[k + 3];
        const r0 = k * nb;
        const r1 = r0 + nb;
        const r2 = r1 + nb;
        const r3 = r2 + nb;
        for (let b = w; b < nb; b++) zcol[b] -= block[r0 + b] * q0 + block[r1 + b] * q1 + block[r2 + b] * q2 + block[r3 + b] * q3;
      }
      for (; k < w; k++) {
        const q0 = lcol[k];
        const r0 = k * nb;
        for (let b = w; b < nb; b++) zcol[b] -= block[r0 + b] * q0;
      }
      for (let r = lj + 1; r < nb; r++) {
        const zij = zcol[r];
        block[r * nb + lj] = zij;
        block[rj + r] = zij;
        zx[p0 + r] = zij;
        s -= lcol[r] * zij;
      }
      block[rj + lj] = s;
      zd[j] = s;
      columnDone(j);
    }
  };

  const starts = supernodesOf(f);
  for (let sn = starts.length - 2; sn >= 0; sn--) {
    const s0 = starts[sn];
    const e = starts[sn + 1] - 1;
    // The block side of column j is |L_j| + 1, growing towards s0: the columns that fit are a trailing run t … e.
    let t = e + 1;
    while (t > s0) {
      const side = colPtr[t] - colPtr[t - 1] + 1;
      if (side * side > maxBlockEntries) break;
      t--;
    }
    if (e - t < 1) t = e + 1; // a lone column gains nothing from the block
    if (t <= e) blockColumns(t, e);
    for (let j = t - 1; j >= s0; j--) {
      sparseColumn(j);
      columnDone(j);
    }
  }
  return { factor: f, values: zx, diag: zd };
}

/**
 * (A⁻¹)_ij for original indices i, j: the diagonal always, off-diagonal only where (i, j) lies in the
 * filled pattern (guaranteed when A_ij ≠ 0). Returns NaN outside the pattern.
 */
export function inverseEntry(z: SelectedInverse, i: number, j: number): number {
  const ip = z.factor.ordering.inversePerm[i];
  const jp = z.factor.ordering.inversePerm[j];
  if (ip === jp) return z.diag[ip];
  const col = ip < jp ? ip : jp;
  const row = ip < jp ? jp : ip;
  const { colPtr, rowIdx } = z.factor;
  let lo = colPtr[col];
  let hi = colPtr[col + 1] - 1;
  while (lo <= hi) {
    const mid = (lo + hi) >> 1;
    const r = rowIdx[mid];
    if (r === row) return z.values[mid];
    if (r < row) lo = mid + 1;
    else hi = mid - 1;
  }
  return Number.NaN;
}

/** Diagonal of A⁻¹ in original numbering. */
export function inverseDiagonal(z: SelectedInverse): Float64Array {
  const n = z.factor.n;
  const out = new Float64Array(n);
  for (let k = 0; k < n; k++) out[z.factor.ordering.perm[k]] = z.diag[k];
  return out;
}

/**
 * Assembles a symmetric CSC (both triangles, rows sorted, duplicates summed) from triplets given for
 * one triangle or both; an off-diagonal triplet (i, j) is mirrored to (j, i).
 */
export function symmetricFromTriplets(
  n: number,
  rows: ArrayLike<number>,
  cols: ArrayLike<number>,
  vals: ArrayLike<number>,
  count: number = rows.length,
): SymmetricCsc {
  const colCount = new Int32Array(n + 1);
  for (let t = 0; t < count; t++) {
    colCount[cols[t] + 1]++;
    if (rows[t] !== cols[t]) colCount[rows[t] + 1]++;
  }
  for (let j = 0; j < n; j++) colCount[j + 1] += colCount[j];
  const total = colCount[n];
  const tmpRow = new Int32Array(total);
  const tmpVal = new Float64Array(total);
  const fill = colCount.slice(0, n);
  for (let t = 0; t < count; t++) {
    const i = rows[t];
    const j = cols[t];
    let p = fill[j]++;
    tmpRow[p] = i;
    tmpVal[p] = vals[t];
    if (i !== j) {
      p = fill[i]++;
      tmpRow[p] = j;
      tmpVal[p] = vals[t];
    }
  }
  // Sum duplicates per column with a scatter array, then sort each short column.
  const where = new Int32Array(n).fill(-1);
  const colPtr = new Int32Array(n + 1);
  const rowIdx = new Int32Array(total);
  const values = new Float64Array(total);
  let nz = 0;
  for (let j = 0; j < n; j++) {
    const start = nz;
    for (let p = colCount[j]; p < colCount[j + 1]; p++) {
      const i = tmpRow[p];
      if (where[i] >= start) values[where[i]] += tmpVal[p];
      else {
        where[i] = nz;
        rowIdx[nz] = i;
        values[nz] = tmpVal[p];
        nz++;
      }
    }
    sortColumn(rowIdx, values, start, nz);
    colPtr[j + 1] = nz;
  }
  return { n, colPtr, rowIdx: rowIdx.slice(0, nz), values: values.slice(0, nz) };
}

function sortColumn(rowIdx: Int32Array, values: Float64Array, start: number, end: number): void {
  for (let a = start + 1; a < end; a++) {
    const r = rowIdx[a];
    const v = values[a];
    let b = a - 1;
    while (b >= start && rowIdx[b] > r) {
      rowIdx[b + 1] = rowIdx[b];
      values[b + 1] = values[b];
      b--;
    }
    rowIdx[b + 1] = r;
    values[b + 1] = v;
  }
}
