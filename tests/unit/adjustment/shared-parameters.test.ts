import { describe, expect, it } from 'vitest';
import { Matrix, inverse } from 'ml-matrix';
import {
  adjustNetwork,
  type AdjustmentInput,
  type NetworkObservation,
  type NetworkPoint,
} from '../../../server/science/adjustment/gauss-markov';
import { datumOffsetName, datumOffsetTerms } from '../../../server/science/adjustment/datum-offsets';
import { mulberry32, normalDeviate, smallRandomNetwork } from './network-fixtures';
import { networkCoverage } from './network-coverage-sim';

/**
 * Dense generalised least squares with ml-matrix (the reference): x̂ = (AᵀΣ⁻¹A)⁻¹AᵀΣ⁻¹l, Q_xx = (AᵀΣ⁻¹A)⁻¹,
 * v = Ax̂ − l, Ω = vᵀΣ⁻¹v, dof = n − u, Σ = Σ_own + B·Σ_shared·Bᵀ (Koch 1999, Parameter Estimation and Hypothesis
 * Testing in Linear Models, §3.2 "Gauss–Markov model with a full covariance matrix" — section from memory).
 * Baarda's w for correlated observations: w_k = e_kᵀΣ⁻¹v / √(e_kᵀΣ⁻¹Q_vΣ⁻¹e_k), Q_v = Σ − A·Q_xx·Aᵀ
 * (Baarda 1968, ch. 2, the w-test for one alternative hypothesis c = e_k).
 * Datum offsets are fixed parameters (columns of A); shared parameters are random effects (only in Σ).
 */
function denseGls(input: AdjustmentInput) {
  const { points, observations } = input;
  const opts = input.options ?? {};
  const offsets = opts.datumOffsets ?? [];
  const shared = opts.sharedParameters ?? [];
  const unknownOf = new Map<string, number>();
  const held = new Map<string, number>();
  for (const p of points) {
    if (p.fixedC !== undefined && !(p.sigmaFixed && p.sigmaFixed > 0)) held.set(p.code, p.fixedC);
    else unknownOf.set(p.code, unknownOf.size);
  }
  const nPts = unknownOf.size;
  offsets.forEach((o, k) => unknownOf.set(`offset:${o}`, nPts + k));
  const sharedOf = new Map(shared.map((s, j) => [s.name, j]));
  const u = unknownOf.size;
  const rows: number[][] = [];
  const bRows: number[][] = [];
  const l: number[] = [];
  const own: number[] = [];
  for (const ob of observations) {
    const a = new Array(u).fill(0);
    const b = new Array(shared.length).fill(0);
    let li = ob.deltaC;
    if (held.has(ob.to)) li -= held.get(ob.to)!;
    else a[unknownOf.get(ob.to)!] += 1;
    if (held.has(ob.from)) li += held.get(ob.from)!;
    else a[unknownOf.get(ob.from)!] -= 1;
    if (ob.datumOffset) a[unknownOf.get(`offset:${ob.datumOffset}`)!] += 1;
    for (const t of ob.terms ?? []) {
      if (unknownOf.has(`offset:${t.name}`)) a[unknownOf.get(`offset:${t.name}`)!] += t.coefficient;
      else b[sharedOf.get(t.name)!] += t.coefficient;
    }
    rows.push(a);
    bRows.push(b);
    l.push(li);
    own.push(ob.sigma ** 2);
  }
  for (const pt of points) {
    if (pt.fixedC !== undefined && pt.sigmaFixed && pt.sigmaFixed > 0) {
      const a = new Array(u).fill(0);
      a[unknownOf.get(pt.code)!] = 1;
      rows.push(a);
      bRows.push(new Array(shared.length).fill(0));
      l.push(pt.fixedC);
      own.push(pt.sigmaFixed ** 2);
    }
  }
  const A = new Matrix(rows);
  const L = Matrix.columnVector(l);
  let Sigma = Matrix.diag(own);
  if (shared.length) {
    const B = new Matrix(bRows);
    Sigma = Sigma.add(B.mmul(Matrix.diag(shared.map((s) => s.sigma ** 2))).mmul(B.transpose()));
  }
  const W = inverse(Sigma);
  const Q = inverse(A.transpose().mmul(W).mmul(A));
  const x = Q.mmul(A.transpose().mmul(W).mmul(L));
  const v = A.mmul(x).sub(L);
  const omega = v.transpose().mmul(W).mmul(v).get(0, 0);
  const Qv = Sigma.sub(A.mmul(Q).mmul(A.transpose()));
  const Wv = W.mmul(v);
  const WQvW = W.mmul(Qv).mmul(W);
  const w = observations.map((_, k) => Wv.get(k, 0) / Math.sqrt(WQvW.get(k, k)));
  const c = new Map<string, { c: number; sigma: number; k: number | null }>();
  for (const pt of points) {
    if (held.has(pt.code)) c.set(pt.code, { c: held.get(pt.code)!, sigma: 0, k: null });
    else {
      const k = unknownOf.get(pt.code)!;
      c.set(pt.code, { c: x.get(k, 0), sigma: Math.sqrt(Q.get(k, k)), k });
    }
  }
  const diff = (from: string, to: string) => {
    const f = c.get(from)!;
    const t = c.get(to)!;
    const qf = f.k === null ? 0 : Q.get(f.k, f.k);
    const qt = t.k === null ? 0 : Q.get(t.k, t.k);
    const qft = f.k === null || t.k === null ? 0 : Q.get(f.k, t.k);
    return { deltaC: t.c - f.c, sigma: Math.sqrt(qf + qt - 2 * qft) };
  };
  const offsetValue = (name: string) => {
    const k = unknownOf.get(`offset:${name}`)!;
    return { value: x.get(k, 0), sigma: Math.sqrt(Q.get(k, k)) };
  };
  return { c, v: v.to1DArray(), w, omega, dof: rows.length - u, sigma0: Math.sqrt(omega / (rows.length - u)), diff, offsetValue };
}

/** Adds repeated clock campaigns with shared clock and link terms to a random levelling network. */
function withClockCampaigns(seed: number): AdjustmentInput {
  const net = smallRandomNetwork(seed, 24, 18, true);
  const rand = mulberry32(seed + 99);
  const trueOf = new Map(net.points.map((p, i) => [p.code, net.trueC[i]]));
  const pairs: [string, string, string, string, string][] = [
    ['BM003', 'BM017', 'clock:Sr-1', 'clock:Yb-2', 'link:L1'],
    ['BM003', 'BM017', 'clock:Sr-1', 'clock:Yb-2', 'link:L1'],
    ['BM003', 'BM017', 'clock:Sr-1', 'clock:Yb-2', 'link:L1'],
    ['BM003', 'BM021', 'clock:Sr-1', 'clock:In-3', 'link:L2'],
    ['BM021', 'BM017', 'clock:In-3', 'clock:Yb-2', 'link:L3'],
    ['BM021', 'BM017', 'clock:In-3', 'clock:Yb-2', 'link:L3'],
  ];
  const clocks: NetworkObservation[] = pairs.map(([from, to, ca, cb, link]) => ({
    from, to, kind: 'clock', sigma: 0.4 + rand(),
    deltaC: trueOf.get(to)! - trueOf.get(from)! + 0.5 * normalDeviate(rand),
    terms: [{ name: ca, coefficient: -1 }, { name: cb, coefficient: 1 }, { name: link, coefficient: 1 }],
  }));
  return {
    points: net.points,
    observations: [...net.observations, ...clocks],
    options: {
      sharedParameters: [
        { name: 'clock:Sr-1', sigma: 0.9 }, { name: 'clock:Yb-2', sigma: 1.4 }, { name: 'clock:In-3', sigma: 2.0 },
        { name: 'link:L1', sigma: 0.3 }, { name: 'link:L2', sigma: 0.5 }, { name: 'link:L3', sigma: 0.2 },
      ],
      differences: [{ from: 'BM003', to: 'BM017' }, { from: 'BM005', to: 'BM011' }, { from: 'BM000', to: 'BM021' }],
      snooping: 'none',
    },
  };
}

describe('shared parameters equal dense generalised least squares with the full covariance (ml-matrix)', () => {
  for (const seed of [3, 8, 15]) {
    it(`seed ${seed}: x̂, σ, σ̂0, dof, residuals, w and difference σ`, () => {
      const input = withClockCampaigns(seed);
      const res = adjustNetwork(input);
      const ref = denseGls(input);
      for (const p of res.points) {
        const r = ref.c.get(p.code)!;
        expect(Math.abs(p.c - r.c)).toBeLessThan(1e-8);
        expect(Math.abs(p.sigma - r.sigma)).toBeLessThan(1e-9 * Math.max(1, r.sigma));
      }
      expect(res.degreesOfFreedom).toBe(ref.dof);
      expect(res.sigma0!).toBeCloseTo(ref.sigma0, 9);
      expect(res.vtpv).toBeCloseTo(ref.omega, 7);
      res.observations.forEach((o, k) => {
        expect(Math.abs(o.residualTotal - ref.v[k])).toBeLessThan(1e-8);
        // An observation with redundancy 0 (a spur) is not controlled: no w (the dense 0/0 is noise).
        if (o.standardizedResidual === null) expect(o.redundancy).toBe(0);
        else expect(o.standardizedResidual).toBeCloseTo(ref.w[k], 7);
      });
      for (const d of res.differences) {
        const r = ref.diff(d.from, d.to);
        expect(d.deltaC).toBeCloseTo(r.deltaC, 8);
        expect(d.sigma).toBeCloseTo(r.sigma, 10);
      }
      // Shared parameters report their estimate and the number of observations sharing them.
      expect(res.sharedParameters.find((s) => s.name === 'link:L1')!.observations).toBe(3);
      expect(res.sharedParameters.every((s) => s.sigma <= s.priorSigma + 1e-12)).toBe(true);
    });
  }

  it('without shared parameters, repeating a campaign 4× halves its σ; with them the shared part stays', () => {
    const points: NetworkPoint[] = [{ code: 'A', fixedC: 0 }, { code: 'B' }];
    const ob = (sigma: number, terms?: NetworkObservation['terms']): NetworkObservation => ({ from: 'A', to: 'B', deltaC: 10, sigma, terms });
    const indep = adjustNetwork({ points, observations: [1, 2, 3, 4].map(() => ob(Math.hypot(1, 2))) });
    const shared = adjustNetwork({
      points, observations: [1, 2, 3, 4].map(() => ob(1, [{ name: 's', coefficient: 1 }])),
      options: { sharedParameters: [{ name: 's', sigma: 2 }] },
    });
    // GUM (JCGM 100:2008 §5.2, F.1.2.3): the variance of a mean of n readings sharing a common systematic term is u_s² + u_own²/n.
    expect(indep.points[1].sigma).toBeCloseTo(Math.hypot(1, 2) / 2, 12);
    expect(shared.points[1].sigma).toBeCloseTo(Math.sqrt(4 + 1 / 4), 12);
    expect(shared.degreesOfFreedom).toBe(3);
  });
});

describe('covariance in adjusted differences', () => {
  it('σ(ΔC) from q_AA + q_BB − 2q_AB is far below the root-sum-square on a long line from a fixed point', () => {
    // 30 sections of 10 km (300 km), σ = 1 mm/√km·9.81; two neighbouring points at the far end share nearly all of it.
    const n = 30;
    const points: NetworkPoint[] = Array.from({ length: n + 1 }, (_, i) => (i === 0 ? { code: 'P0', fixedC: 0 } : { code: `P${i}` }));
    const sigma = 0.001 * Math.sqrt(10) * 9.81;
    const observations: NetworkObservation[] = Array.from({ length: n }, (_, i) => ({ from: `P${i}`, to: `P${i + 1}`, deltaC: 1, sigma }));
    const res = adjustNetwork({ points, observations, options: { differences: [{ from: `P${n - 1}`, to: `P${n}` }, { from: 'P0', to: `P${n}` }] } });
    const [near, whole] = res.differences;
    // A chain is a tree: the difference of two neighbours is the one section between them (dense GLS reduces to it).
    expect(near.sigma).toBeCloseTo(sigma, 12);
    expect(near.sigmaIgnoringCovariance).toBeCloseTo(Math.sqrt((n - 1 + n) * sigma * sigma), 10);
    expect(whole.sigma).toBeCloseTo(Math.sqrt(n) * sigma, 12);
    expect(near.sigmaIgnoringCovariance / near.sigma).toBeGreaterThan(7);
  });

  it('pairs outside the factor pattern come from an extra solve and match dense GLS', () => {
    const net = smallRandomNetwork(77, 40, 25, false);
    const differences = [{ from: 'BM001', to: 'BM039' }, { from: 'BM013', to: 'BM027' }, { from: 'BM002', to: 'BM030' }, { from: 'BM000', to: 'BM005' }];
    const input: AdjustmentInput = { points: net.points, observations: net.observations, options: { differences } };
    const res = adjustNetwork(input);
    const ref = denseGls(input);
    for (const d of res.differences) expect(d.sigma).toBeCloseTo(ref.diff(d.from, d.to).sigma, 10);
  });
});

describe('datum offsets: one parameter per datum relative to a reference datum', () => {
  // Three datums D1 (reference), D2, D3, each a small levelled block with its own fixed benchmark; clock links between
  // all three pairs (two campaigns each). True offsets: o_D2 = +0.8, o_D3 = −1.1 m²/s² (C in datum d − true C).
  const build = () => {
    const rand = mulberry32(2024);
    const points: NetworkPoint[] = [];
    const observations: NetworkObservation[] = [];
    const trueOffset = new Map([['D1', 0], ['D2', 0.8], ['D3', -1.1]]);
    const site = new Map<string, string>();
    const trueC = new Map<string, number>();
    for (const d of ['D1', 'D2', 'D3']) {
      for (let i = 0; i < 4; i++) {
        const code = `${d}-${i}`;
        const c = 500 * (Number(d[1]) + i / 4);
        trueC.set(code, c);
        points.push(i === 0 ? { code, fixedC: c + trueOffset.get(d)! } : { code });
        if (i > 0) observations.push({ from: `${d}-${i - 1}`, to: code, deltaC: c - trueC.get(`${d}-${i - 1}`)! + 0.01 * normalDeviate(rand), sigma: 0.01 });
      }
      observations.push({ from: `${d}-0`, to: `${d}-3`, deltaC: trueC.get(`${d}-3`)! - trueC.get(`${d}-0`)! + 0.01 * normalDeviate(rand), sigma: 0.01 });
      site.set(d, `${d}-3`);
    }
    const clockObs: [string, string][] = [['D1', 'D2'], ['D2', 'D3'], ['D3', 'D1'], ['D1', 'D2'], ['D2', 'D3'], ['D3', 'D1']];
    const clocks = clockObs.map(([a, b]) => ({ a, b, from: site.get(a)!, to: site.get(b)!, deltaC: trueC.get(site.get(b)!)! - trueC.get(site.get(a)!)! + 0.3 * normalDeviate(rand) }));
    return { points, observations, clocks };
  };

  it('per-datum offsets close around the loop, match dense GLS and recover the true offsets', () => {
    const { points, observations, clocks } = build();
    const obs: NetworkObservation[] = [
      ...observations,
      ...clocks.map((c) => ({ from: c.from, to: c.to, deltaC: c.deltaC, sigma: 0.3, kind: 'clock' as const, terms: datumOffsetTerms(c.a, c.b, 'D1') })),
    ];
    const input: AdjustmentInput = { points, observations: obs, options: { datumOffsets: [datumOffsetName('D2', 'D1'), datumOffsetName('D3', 'D1')], snooping: 'none' } };
    const res = adjustNetwork(input);
    const ref = denseGls(input);
    expect(res.datumOffsets.map((d) => d.name)).toEqual(['D2 relative to D1', 'D3 relative to D1']);
    for (const d of res.datumOffsets) {
      const r = ref.offsetValue(d.name);
      expect(d.value).toBeCloseTo(r.value, 9);
      expect(d.sigma).toBeCloseTo(r.sigma, 10);
    }
    expect(Math.abs(res.datumOffsets[0].value - 0.8)).toBeLessThan(4 * res.datumOffsets[0].sigma);
    expect(Math.abs(res.datumOffsets[1].value + 1.1)).toBeLessThan(4 * res.datumOffsets[1].sigma);
    // Two offsets for three datums: the loop D1→D2→D3→D1 closes exactly; one pair parameter per link would not.
    const pairTerms = (a: string, b: string) => [{ name: `${b} vs ${a}`, coefficient: 1 }];
    const pairNames = ['D2 vs D1', 'D3 vs D2', 'D1 vs D3'];
    const perPair = adjustNetwork({
      points, observations: [...observations, ...clocks.map((c) => ({ from: c.from, to: c.to, deltaC: c.deltaC, sigma: 0.3, terms: pairTerms(c.a, c.b) }))],
      options: { datumOffsets: pairNames, snooping: 'none' },
    });
    const loop = perPair.datumOffsets.reduce((s, d) => s + d.value, 0);
    expect(Math.abs(loop)).toBeGreaterThan(0.01);
    expect(res.degreesOfFreedom).toBe(perPair.degreesOfFreedom + 1);
  });
});

describe("data snooping as Baarda's iteration", () => {
  it('two blunders are removed one at a time, largest |w| first; only they are suspected; the rest matches an adjustment without them', () => {
    const net = smallRandomNetwork(55, 30, 30, false);
    const clean = adjustNetwork({ points: net.points, observations: net.observations });
    const controlled = clean.observations.filter((o) => o.redundancy > 0.4).map((o) => o.index);
    const [i1, i2] = [controlled[0], controlled[controlled.length - 1]];
    const blundered = net.observations.map((o, i) => (i === i1 ? { ...o, deltaC: o.deltaC + 0.08 * 9.81 } : i === i2 ? { ...o, deltaC: o.deltaC - 0.05 * 9.81 } : o));
    const res = adjustNetwork({ points: net.points, observations: blundered });
    expect(res.snooping.removals.map((r) => r.index).sort()).toEqual([i1, i2].sort());
    const ws = res.snooping.removals.map((r) => Math.abs(r.standardizedResidual));
    ws.forEach((w) => expect(w).toBeGreaterThan(res.snooping.criticalValue));
    expect(res.observations.filter((o) => o.suspected).map((o) => o.index).sort()).toEqual([i1, i2].sort());
    expect(res.snooping.maxRemainingW!).toBeLessThanOrEqual(res.snooping.criticalValue);
    // The final adjustment is the adjustment without the suspects (same estimator, computed independently).
    const without = adjustNetwork({ points: net.points, observations: blundered.filter((_, i) => i !== i1 && i !== i2) });
    for (const [j, p] of res.points.entries()) expect(p.c).toBeCloseTo(without.points[j].c, 9);
    expect(res.sigma0!).toBeCloseTo(without.sigma0!, 10);
  });

  it('the rank-one screening gives the same removals, w and final adjustment as re-adjusting after every removal', () => {
    for (const seed of [61, 62, 63]) {
      const net = smallRandomNetwork(seed, 60, 70, true);
      const rand = mulberry32(seed);
      // five blunders of 30–80 mm in well-controlled sections
      const obs = net.observations.map((o) => ({ ...o }));
      for (let b = 0; b < 5; b++) obs[Math.floor(rand() * obs.length)].deltaC += (0.03 + 0.05 * rand()) * 9.81 * (rand() < 0.5 ? -1 : 1);
      const fast = adjustNetwork({ points: net.points, observations: obs });
      // Reference: Baarda's iteration done by hand, one full adjustment per step (snooping 'none' only tests).
      const kept = obs.map((_, i) => i);
      const order: { index: number; w: number }[] = [];
      let pts = net.points;
      for (;;) {
        const res = adjustNetwork({ points: pts, observations: kept.map((i) => obs[i]), options: { snooping: 'none' } });
        const cands = [
          ...res.observations.map((o, j) => ({ kind: 'o' as const, j, w: o.standardizedResidual })),
          ...res.fixedPointObservations.map((o) => ({ kind: 'f' as const, j: pts.findIndex((p) => p.code === o.code), w: o.standardizedResidual })),
        ].filter((c) => c.w !== null && Math.abs(c.w) > res.snooping.criticalValue);
        if (!cands.length || res.degreesOfFreedom === 0) break;
        const top = cands.reduce((a, b) => (Math.abs(b.w!) > Math.abs(a.w!) ? b : a));
        if (top.kind === 'o') { order.push({ index: kept[top.j], w: top.w! }); kept.splice(top.j, 1); }
        else { order.push({ index: -1 - top.j, w: top.w! }); pts = pts.map((p, i) => (i === top.j ? { code: p.code } : p)); }
      }
      // Same |w| at every step; the same observation except where two share |w| exactly (a tie, e.g. two sections in
      // series on a spur), where either is Baarda's choice.
      expect(fast.snooping.removals.length).toBe(order.length);
      fast.snooping.removals.forEach((r, i) => {
        expect(Math.abs(r.standardizedResidual)).toBeCloseTo(Math.abs(order[i].w), 8);
        const tie = Math.abs(Math.abs(order[i].w) - Math.abs(r.standardizedResidual)) < 1e-8 && (r.source === 'observation' ? r.index : -1 - r.index) !== order[i].index;
        if (!tie) expect(r.source === 'observation' ? r.index : -1 - r.index).toBe(order[i].index);
      });
      // The final adjustment is the adjustment without the removed observations, computed independently.
      const removedObs = new Set(fast.snooping.removals.filter((r) => r.source === 'observation').map((r) => r.index));
      const removedPts = new Set(fast.snooping.removals.filter((r) => r.source === 'fixedPoint').map((r) => r.index));
      const final = adjustNetwork({
        points: net.points.map((p, i) => (removedPts.has(i) ? { code: p.code } : p)),
        observations: obs.filter((_, i) => !removedObs.has(i)), options: { snooping: 'none' },
      });
      for (const [j, p] of fast.points.entries()) expect(p.c).toBeCloseTo(final.points[j].c, 9);
      expect(fast.sigma0!).toBeCloseTo(final.sigma0!, 10);
      expect(final.snooping.maxRemainingW!).toBeLessThanOrEqual(final.snooping.criticalValue);
      expect(order.length).toBeGreaterThanOrEqual(3);
    }
  });

  it("snooping 'none' flags every |w| above k without removing anything", () => {
    const net = smallRandomNetwork(55, 30, 30, false);
    const obs = net.observations.map((o, i) => (i === 3 ? { ...o, deltaC: o.deltaC + 0.1 * 9.81 } : o));
    const res = adjustNetwork({ points: net.points, observations: obs, options: { snooping: 'none' } });
    expect(res.snooping.removals).toEqual([]);
    expect(res.observations.some((o) => o.suspected)).toBe(true);
  });
});

describe('network Monte Carlo coverage (JCGM 101:2008 §7), reduced size, fixed seed', () => {
  it('four campaigns of one clock pair + a weak levelling line: shared parameters cover ≈ 95 %, independent rows do not', () => {
    const f = networkCoverage({ trials: 400, seed: 7, campaigns: 4, ownSigma: 0.6, clockA: 1.0, clockB: 1.2, link: 0.3, sections: 6, sectionSigma: 1.2, k: 2 });
    // With the model right, ΔC ± 2σ holds the true value with p = 95.45 % (normal); 400 trials give a binomial σ ≈ 1 %.
    expect(f.shared).toBeGreaterThan(0.92);
    expect(f.shared).toBeLessThan(0.985);
    expect(f.independent).toBeLessThan(0.9);
    expect(f.meanSigmaShared).toBeGreaterThan(f.meanSigmaIndependent);
  });
});
