// Loop misclosures of a levelling network from a fundamental cycle basis (breadth-first spanning tree; each
// non-tree section closes one independent loop: Paton, "An algorithm for finding a fundamental set of cycles of a graph",
// CACM 12(9), 1969). Tolerance k·√L with L the loop length in km (FGCC 1984, Standards and Specifications for Geodetic Control Networks, §3.5).

export interface LoopSection {
  id?: string;
  from: string;
  to: string;
  /** Observed C_to − C_from [m²/s²]. */
  deltaC: number;
  lengthKm: number;
}

export interface LoopOptions {
  /** Tolerance coefficient k in mm/√km. Default 4: FGCC (1984) §3.5 loop closure, first-order class I (value from memory, not confirmed). */
  toleranceMmPerSqrtKm?: number;
  /** Gravity used to turn ΔC into a height misclosure [m/s²]. Default 9.81, a rough conventional value. */
  meanGravity_ms2?: number;
}

export interface Loop {
  /** Section indices (into the input) in traversal order. */
  sections: Int32Array;
  /** +1 when the section is traversed from → to, −1 when reversed. */
  orientation: Int8Array;
  /** Σ ± ΔC around the loop [m²/s²]. */
  misclosure_m2s2: number;
  /** misclosure_m2s2 / meanGravity [mm]. */
  misclosureMm: number;
  lengthKm: number;
  toleranceMm: number;
  passed: boolean;
}

export interface LoopReport {
  loops: Loop[];
  /** Sections − points + connected parts: the number of independent loops. */
  independentLoops: number;
  toleranceMmPerSqrtKm: number;
  meanGravity_ms2: number;
}

export class LoopInputError extends Error {
  readonly path: string;
  constructor(path: string, message: string) {
    super(`${path}: ${message}`);
    this.name = 'LoopInputError';
    this.path = path;
  }
}

/**
 * Builds one loop per section outside a breadth-first spanning forest: the section plus the tree
 * paths from its ends to their lowest common ancestor. These loops are independent (a cycle basis)
 * but not the shortest possible; a long loop gets a proportionally larger tolerance, so a blunder is
 * best located by the adjustment's data snooping rather than by loops alone.
 * Sections joining a point to itself form a loop of their own.
 */
export function loopMisclosures(sections: LoopSection[], options: LoopOptions = {}): LoopReport {
  const k = options.toleranceMmPerSqrtKm ?? 4;
  const g = options.meanGravity_ms2 ?? 9.81;
  if (!(k > 0)) throw new LoopInputError('options.toleranceMmPerSqrtKm', 'must be > 0');
  if (!(g > 0)) throw new LoopInputError('options.meanGravity_ms2', 'must be > 0');

  const pointIndex = new Map<string, number>();
  const m = sections.length;
  const from = new Int32Array(m);
  const to = new Int32Array(m);
  const idOf = (code: string): number => {
    let i = pointIndex.get(code);
    if (i === undefined) {
      i = pointIndex.size;
      pointIndex.set(code, i);
    }
    return i;
  };
  sections.forEach((s, e) => {
    if (!Number.isFinite(s.deltaC)) throw new LoopInputError(`sections[${e}].deltaC`, 'not finite');
    if (!(Number.isFinite(s.lengthKm) && s.lengthKm >= 0)) throw new LoopInputError(`sections[${e}].lengthKm`, 'must be ≥ 0');
    from[e] = idOf(s.from);
    to[e] = idOf(s.to);
  });
  const n = pointIndex.size;

  const start = new Int32Array(n + 1);
  for (let e = 0; e < m; e++) {
    start[from[e] + 1]++;
    start[to[e] + 1]++;
  }
  for (let i = 0; i < n; i++) start[i + 1] += start[i];
  const adj = new Int32Array(2 * m);
  const fill = start.slice(0, n);
  for (let e = 0; e < m; e++) {
    adj[fill[from[e]]++] = e;
    adj[fill[to[e]]++] = e;
  }

  // BFS forest: parentEdge, depth.
  const parentEdge = new Int32Array(n).fill(-1);
  const depth = new Int32Array(n).fill(-1);
  const treeEdge = new Uint8Array(m);
  const queue = new Int32Array(n);
  let parts = 0;
  for (let root = 0; root < n; root++) {
    if (depth[root] >= 0) continue;
    parts++;
    let qh = 0;
    let qt = 0;
    queue[qt++] = root;
    depth[root] = 0;
    while (qh < qt) {
      const i = queue[qh++];
      for (let p = start[i]; p < start[i + 1]; p++) {
        const e = adj[p];
        const j = from[e] === i ? to[e] : from[e];
        if (depth[j] >= 0) continue;
        depth[j] = depth[i] + 1;
        parentEdge[j] = e;
        treeEdge[e] = 1;
        queue[qt++] = j;
      }
    }
  }

  const other = (e: number, i: number): number => (from[e] === i ? to[e] : from[e]);
  const loops: Loop[] = [];
  const upA: number[] = [];
  const upB: number[] = [];
  for (let e = 0; e < m; e++) {
    if (treeEdge[e]) continue;
    // Walk e: from → to, then back from `to` to `from` through the tree.
    upA.length = 0;
    upB.length = 0;
    let a = to[e];
    let b = from[e];
    while (a !== b) {
      if (depth[a] >= depth[b]) {
        upA.push(parentEdge[a]);
        a = other(parentEdge[a], a);
      } else {
        upB.push(parentEdge[b]);
        b = other(parentEdge[b], b);
      }
    }
    const len = 1 + upA.length + upB.length;
    const secs = new Int32Array(len);
    const orient = new Int8Array(len);
    secs[0] = e;
    orient[0] = 1;
    let pos = 1;
    let at = to[e];
    for (const te of upA) {
      secs[pos] = te;
      orient[pos] = from[te] === at ? 1 : -1;
      at = other(te, at);
      pos++;
    }
    // Down the other branch, from the common ancestor to `from`.
    for (let q = upB.length - 1; q >= 0; q--) {
      const te = upB[q];
      secs[pos] = te;
      orient[pos] = from[te] === at ? 1 : -1;
      at = other(te, at);
      pos++;
    }
    let sum = 0;
    let lengthKm = 0;
    for (let q = 0; q < len; q++) {
      sum += orient[q] * sections[secs[q]].deltaC;
      lengthKm += sections[secs[q]].lengthKm;
    }
    const misclosureMm = (sum / g) * 1000;
    const toleranceMm = k * Math.sqrt(lengthKm);
    loops.push({ sections: secs, orientation: orient, misclosure_m2s2: sum, misclosureMm, lengthKm, toleranceMm, passed: Math.abs(misclosureMm) <= toleranceMm });
  }
  return { loops, independentLoops: m - n + parts, toleranceMmPerSqrtKm: k, meanGravity_ms2: g };
}
