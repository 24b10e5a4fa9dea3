// Fill-reducing ordering for sparse symmetric matrices: approximate minimum degree on the quotient graph.
// Method: Amestoy, Davis & Duff, "An approximate minimum degree ordering algorithm", SIAM J. Matrix Anal. Appl. 17(4), 1996
// (element absorption, approximate external degree bound); George & Liu, "The evolution of the minimum degree ordering algorithm", SIAM Review 31, 1989.

/**
 * Symmetric sparsity pattern in compressed-sparse-column form. Both triangles must be present;
 * diagonal entries may or may not be stored (they are ignored).
 */
export interface SymmetricPattern {
  n: number;
  colPtr: Int32Array;
  rowIdx: Int32Array;
}

export interface Ordering {
  /** perm[k] = original index eliminated k-th. */
  perm: Int32Array;
  /** inversePerm[i] = elimination step of original index i. */
  inversePerm: Int32Array;
}

/**
 * Approximate minimum degree ordering.
 *
 * This is a compact version of AMD: the quotient graph keeps, for every uneliminated variable, its
 * variable neighbours A_i and adjacent elements E_i; every eliminated pivot p becomes an element whose
 * variable list L_p is the union of A_p and the lists of the elements it absorbs. The degree of a
 * variable i touched by p is replaced by the AMD upper bound
 *   d_i = min(nLeft - 1, d_i + |L_p \ i|, |A_i \ i| + |L_p \ i| + Σ_{e ∈ E_i \ p} |L_e \ L_p|),
 * with |L_e \ L_p| obtained in one pass over L_p. Elements wholly inside L_p are absorbed at once
 * (aggressive absorption). Not implemented, compared with the published AMD: supervariable detection
 * (indistinguishable nodes) and dense-row postponement; those save time on meshes with many
 * identical rows but do not change the kind of ordering. Ties are broken last-in-first-out.
 */
export function approximateMinimumDegree(pattern: SymmetricPattern, onPivots?: (fraction: number) => void): Ordering {
  const n = pattern.n;
  const perm = new Int32Array(n);
  const inversePerm = new Int32Array(n);
  if (n === 0) return { perm, inversePerm };

  const varAdj: Int32Array[] = new Array(n);
  const elemAdj: number[][] = new Array(n);
  const elemVars: (Int32Array | null)[] = new Array(n).fill(null);
  const eliminated = new Uint8Array(n);
  const deadElement = new Uint8Array(n);
  const degree = new Int32Array(n);

  for (let j = 0; j < n; j++) {
    let count = 0;
    for (let p = pattern.colPtr[j]; p < pattern.colPtr[j + 1]; p++) if (pattern.rowIdx[p] !== j) count++;
    const adj = new Int32Array(count);
    count = 0;
    for (let p = pattern.colPtr[j]; p < pattern.colPtr[j + 1]; p++) {
      const i = pattern.rowIdx[p];
      if (i !== j) adj[count++] = i;
    }
    varAdj[j] = adj;
    elemAdj[j] = [];
    degree[j] = count;
  }

  // Degree buckets as doubly linked lists.
  const head = new Int32Array(n).fill(-1);
  const next = new Int32Array(n).fill(-1);
  const prev = new Int32Array(n).fill(-1);
  const insert = (i: number): void => {
    const d = degree[i];
    next[i] = head[d];
    prev[i] = -1;
    if (head[d] !== -1) prev[head[d]] = i;
    head[d] = i;
  };
  const remove = (i: number): void => {
    if (prev[i] !== -1) next[prev[i]] = next[i];
    else head[degree[i]] = next[i];
    if (next[i] !== -1) prev[next[i]] = prev[i];
  };
  for (let i = 0; i < n; i++) insert(i);

  const mark = new Int32Array(n).fill(-1);
  const wStamp = new Int32Array(n).fill(-1);
  const w = new Int32Array(n);
  const lp: number[] = [];
  let minDeg = 0;

  for (let k = 0; k < n; k++) {
    while (head[minDeg] === -1) minDeg++;
    const p = head[minDeg];
    remove(p);
    eliminated[p] = 1;
    perm[k] = p;
    inversePerm[p] = k;
    const nLeft = n - k - 1;

    // Form element p: L_p = (A_p ∪ ⋃ L_e) \ {p}; absorbed elements die.
    lp.length = 0;
    mark[p] = k;
    for (const j of varAdj[p]) {
      if (!eliminated[j] && mark[j] !== k) {
        mark[j] = k;
        lp.push(j);
      }
    }
    for (const e of elemAdj[p]) {
      if (deadElement[e]) continue;
      const vars = elemVars[e] as Int32Array;
      for (let q = 0; q < vars.length; q++) {
        const j = vars[q];
        if (!eliminated[j] && mark[j] !== k) {
          mark[j] = k;
          lp.push(j);
        }
      }
      deadElement[e] = 1;
      elemVars[e] = null;
    }
    const lpArr = Int32Array.from(lp);
    elemVars[p] = lpArr;
    varAdj[p] = new Int32Array(0);
    elemAdj[p] = [];
    const lpSize = lpArr.length;

    // |L_e \ L_p| for every live element next to L_p.
    for (let q = 0; q < lpSize; q++) {
      const i = lpArr[q];
      remove(i);
      for (const e of elemAdj[i]) {
        if (deadElement[e]) continue;
        if (wStamp[e] !== k) {
          // A live element holds uneliminated variables only (eliminating one of its variables absorbs it), so
          // |L_e| is its length: no scan of L_e per pivot.
          wStamp[e] = k;
          w[e] = (elemVars[e] as Int32Array).length;
        }
        w[e]--;
      }
    }

    for (let q = 0; q < lpSize; q++) {
      const i = lpArr[q];
      let extSum = 0;
      // Compact E_i in place (dead and absorbed elements out), then add p.
      const elems = elemAdj[i];
      let ne = 0;
      for (let t = 0; t < elems.length; t++) {
        const e = elems[t];
        if (deadElement[e]) continue;
        if (w[e] <= 0) {
          deadElement[e] = 1; // L_e ⊆ L_p: e adds nothing that p does not already hold.
          elemVars[e] = null;
          continue;
        }
        elems[ne++] = e;
        extSum += w[e];
      }
      elems.length = ne;
      elems.push(p);

      // Variable edges now represented by element p are dropped.
      const adj = varAdj[i];
      let m = 0;
      for (let t = 0; t < adj.length; t++) {
        const j = adj[t];
        if (!eliminated[j] && mark[j] !== k) adj[m++] = j;
      }
      varAdj[i] = m === adj.length ? adj : adj.slice(0, m);

      const bound = Math.min(nLeft - 1, degree[i] + lpSize - 1, m + lpSize - 1 + extSum);
      degree[i] = Math.max(bound, 0);
      insert(i);
      if (degree[i] < minDeg) minDeg = degree[i];
    }
    if (onPivots && (k & 1023) === 1023) onPivots(k / n);
  }
  return { perm, inversePerm };
}

/** Identity ordering, for comparisons and tests. */
export function naturalOrdering(n: number): Ordering {
  const perm = new Int32Array(n);
  for (let i = 0; i < n; i++) perm[i] = i;
  return { perm, inversePerm: perm.slice() };
}
