// Seeded random levelling networks for the adjustment tests and benchmark.
// Generator: mulberry32 (a public-domain 32-bit PRNG, common practice) and the Box–Muller transform for normal deviates.

import { Matrix } from 'ml-matrix';
import type { NetworkObservation, NetworkPoint } from '../../../server/science/adjustment/gauss-markov';

export function mulberry32(seed: number): () => number {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

export function normalDeviate(rand: () => number): number {
  const u = Math.max(rand(), 1e-300);
  return Math.sqrt(-2 * Math.log(u)) * Math.cos(2 * Math.PI * rand());
}

export interface RandomNetwork {
  points: NetworkPoint[];
  observations: (NetworkObservation & { lengthKm: number })[];
  trueC: number[];
}

/**
 * Small network: random spanning tree plus `extraEdges` chords (each chord closes a loop). Point 0 is
 * held; optionally point 1 is a weighted datum point. ΔC = true difference + N(0, σ²) with
 * σ = 1 mm·√L·9.81 expressed in m²/s².
 */
export function smallRandomNetwork(seed: number, nPoints: number, extraEdges: number, withWeightedDatum = false): RandomNetwork {
  const rand = mulberry32(seed);
  const trueC = Array.from({ length: nPoints }, () => 100 + 4000 * rand());
  const points: NetworkPoint[] = trueC.map((_, i) => ({ code: `BM${String(i).padStart(3, '0')}` }));
  points[0].fixedC = trueC[0];
  if (withWeightedDatum && nPoints > 2) {
    points[1].fixedC = trueC[1] + 0.01 * normalDeviate(rand);
    points[1].sigmaFixed = 0.01;
  }
  const observations: RandomNetwork['observations'] = [];
  const addObs = (i: number, j: number): void => {
    const lengthKm = 1 + 20 * rand();
    const sigma = 0.001 * Math.sqrt(lengthKm) * 9.81;
    observations.push({
      id: `S${observations.length}`,
      from: points[i].code,
      to: points[j].code,
      deltaC: trueC[j] - trueC[i] + sigma * normalDeviate(rand),
      sigma,
      kind: 'levelling',
      lengthKm,
    });
  };
  for (let i = 1; i < nPoints; i++) {
    const j = Math.floor(rand() * i);
    if (rand() < 0.5) addObs(i, j);
    else addObs(j, i);
  }
  for (let e = 0; e < extraEdges; e++) {
    const i = Math.floor(rand() * nPoints);
    let j = Math.floor(rand() * nPoints);
    if (j === i) j = (i + 1) % nPoints;
    addObs(i, j);
  }
  return { points, observations, trueC };
}

/**
 * Large planar-like network for the benchmark: benchmarks on a jittered √n × √n grid, sections to the
 * east and north neighbours and one diagonal per cell (≈ 3 sections per benchmark), a few long clock
 * links, one held benchmark per ~2,000 and a weighted one per ~2,000. Levelling networks are nearly
 * planar; a purely random graph of the same size would have no small separators and far more fill.
 */
export function gridNetwork(seed: number, nPoints: number): RandomNetwork {
  const rand = mulberry32(seed);
  const side = Math.ceil(Math.sqrt(nPoints));
  const trueC: number[] = [];
  for (let i = 0; i < nPoints; i++) {
    const x = i % side;
    const y = Math.floor(i / side);
    trueC.push(500 + 30 * x + 20 * y + 50 * rand());
  }
  const points: NetworkPoint[] = trueC.map((_, i) => ({ code: `P${i}` }));
  const observations: RandomNetwork['observations'] = [];
  const add = (i: number, j: number, kind: 'levelling' | 'clock', sigmaOverride?: number): void => {
    const lengthKm = 2 + 8 * rand();
    const sigma = sigmaOverride ?? 0.001 * Math.sqrt(lengthKm) * 9.81;
    observations.push({
      from: points[i].code,
      to: points[j].code,
      deltaC: trueC[j] - trueC[i] + sigma * normalDeviate(rand),
      sigma,
      kind,
      lengthKm,
    });
  };
  for (let i = 0; i < nPoints; i++) {
    const x = i % side;
    const east = i + 1;
    const north = i + side;
    if (x + 1 < side && east < nPoints) add(i, east, 'levelling');
    if (north < nPoints) add(i, north, 'levelling');
    if (x + 1 < side && north + 1 < nPoints) {
      if (rand() < 0.5) add(i, north + 1, 'levelling');
      else add(i + 1, north, 'levelling');
    }
  }
  const clockLinks = Math.max(1, Math.floor(nPoints / 3000));
  for (let c = 0; c < clockLinks; c++) {
    const i = Math.floor(rand() * nPoints);
    const j = Math.floor(rand() * nPoints);
    if (i !== j) add(i, j, 'clock', 0.5);
  }
  for (let i = 0; i < nPoints; i += 1000) {
    points[i].fixedC = trueC[i];
    if ((i / 1000) % 2 === 1) points[i].sigmaFixed = 0.02;
  }
  return { points, observations, trueC };
}

/**
 * The dense design of a levelling network for reference solutions: A (one row per observation, then one per weighted
 * datum point), l, the σ of each row and P = diag(1/σ²). Held points (fixedC without sigmaFixed) are moved into l;
 * a point with fixedC and sigmaFixed > 0 is an unknown with a pseudo-observation.
 */
export function denseDesign(points: NetworkPoint[], observations: NetworkObservation[]) {
  const unknownOf = new Map<string, number>();
  const held = new Map<string, number>();
  for (const p of points) {
    if (p.fixedC !== undefined && !(p.sigmaFixed && p.sigmaFixed > 0)) held.set(p.code, p.fixedC);
    else unknownOf.set(p.code, unknownOf.size);
  }
  const u = unknownOf.size;
  const rows: number[][] = [];
  const l: number[] = [];
  const sigma: number[] = [];
  for (const ob of observations) {
    const a = new Array<number>(u).fill(0);
    let li = ob.deltaC;
    if (held.has(ob.to)) li -= held.get(ob.to)!;
    else a[unknownOf.get(ob.to)!] += 1;
    if (held.has(ob.from)) li += held.get(ob.from)!;
    else a[unknownOf.get(ob.from)!] -= 1;
    rows.push(a);
    l.push(li);
    sigma.push(ob.sigma);
  }
  for (const pt of points) {
    if (pt.fixedC !== undefined && pt.sigmaFixed && pt.sigmaFixed > 0) {
      const a = new Array<number>(u).fill(0);
      a[unknownOf.get(pt.code)!] = 1;
      rows.push(a);
      l.push(pt.fixedC);
      sigma.push(pt.sigmaFixed);
    }
  }
  const A = new Matrix(rows);
  const P = Matrix.diag(sigma.map((s) => 1 / (s * s)));
  return { unknownOf, held, u, A, P, l, sigma };
}
