// Calibration chain of a transportable clock T: the potential difference between the remote site where T stood and the
// site of its partner clock, from the difference of a remote comparison and one or two side-by-side calibrations of T
// against the same reference clock R.
//
//   Redshift to first order in 1/c² (Mehlstäubler et al. 2018, Rep. Prog. Phys. 81:064401, eq. 1): y = ΔC/c² + b,
//   where b is the difference of the two clocks' systematic offsets. Oriented "T relative to its partner":
//     remote        y_r = (C_T@remote − C_X)/c² + b_T − b_X
//     side by side  y_s = L/c² + b_T − b_R   (L = local potential difference between the clocks' reference points)
//   so the calibrated offset o = y_s − L/c² = b_T − b_R and, with X = R,
//     ΔC_remote = C(remote) − C(partner) = c²·(y_r − ȳ_s),  ȳ_s = w_b·o_before + w_a·o_after,  w_b + w_a = 1,
//   in which b_T (and b_R) cancel exactly: they are the same input quantities in both comparisons.
//
// Uncertainty: the law of propagation for correlated inputs, JCGM 100:2008 §5.2.2 eq. (13),
//   u_c²(y) = Σ c_i² u²(x_i) + 2 Σ_{i<j} c_i c_j u(x_i, x_j).
// A quantity that enters several comparisons (a clock's budget version, a fibre link, a reference ratio, a local tie)
// is one input x_i whose sensitivity is the sum of its sensitivities in every comparison (JCGM 100:2008 §5.2.2 note 1
// and F.1.2.3: inputs with r = +1 are the same quantity); after this grouping the inputs are independent and eq. (13)
// reduces to eq. (10) over distinct quantities. ν_eff by Welch–Satterthwaite (JCGM 100:2008 G.4.1, eq. G.2b),
// k = t_p(ν_eff) (G.3, G.6.4).
//
// Transport reproducibility: T's offset may change between the calibrations and the remote comparison. Either entered
// (standard uncertainty with its source) or, with both calibrations, from their difference d: the offset during the
// remote comparison taken to lie anywhere between the two, a rectangular distribution of half-width |d|/2, so
// u = |d|/(2√3) (JCGM 100:2008 §4.3.7), with ν = 2 for a 50 % relative reliability of that estimate (G.4.2, eq. G.3;
// our judgement: one difference says little about its own spread). The difference itself is reported with
// E_n = d / U(d), U(d) = 2·u(d), u(d) from the inputs the two calibrations do not share (ISO 13528:2015 §9.7 for E_n).
//
// Tides: every comparison's y is its own result's mean of samples with the periodic tide at each site removed sample
// by sample; the chain uses those y and carries each comparison's tide-model term as one of its own inputs.

import { C2_M2_PER_S2 } from './constants';
import { ScienceInputError } from './errors';
import { COVERAGE_PROBABILITY_K2, coverageFactorFor } from './uncertainty';

/** One input of a comparison's budget of y. */
export interface ChainInputTerm {
  /**
   * Names the input quantity when other comparisons may share it (`budget:<id>`, `link:<id>`, `ratio:A/B`, `tie:…`):
   * the same key is the same quantity. null: the comparison's own (statistical, tide model, …).
   */
  key: string | null;
  label: string;
  type: 'A' | 'B';
  standardUncertainty: number;
  /** ∂y/∂x_i for the comparison's y as stated (clock B relative to clock A). */
  sensitivity: number;
  /** '1' for a fractional input. */
  unit: string;
  degreesOfFreedom?: number;
}

export interface ChainComparison {
  id: string;
  name: string;
  /** Tide-corrected mean fractional offset y = ν_B/(ν_A·R0) − 1 of the comparison's result. */
  y: number;
  /** Which clock of the comparison is T. */
  transportableIs: 'A' | 'B';
  terms: ChainInputTerm[];
  /** Side by side only: local potential difference C(site B) − C(site A) between the two clocks, m²/s². */
  localTie?: { deltaC_m2s2: number; standardUncertainty_m2s2: number; key: string; source: string } | null;
}

export interface ChainInput {
  remote: ChainComparison;
  before?: ChainComparison | null;
  after?: ChainComparison | null;
  /** Entered transport reproducibility (fractional standard uncertainty) and its source; overrides the before/after estimate. */
  transportReproducibility?: { standardUncertainty: number; source: string } | null;
  coverageProbability?: number;
}

export interface ChainBudgetLine {
  /** The input quantity's key (`own:<comparison>:<n>` for a comparison's own input, `transport` for the reproducibility term). */
  key: string;
  label: string;
  type: 'A' | 'B';
  unit: string;
  standardUncertainty: number;
  /** ∂ΔC/∂x_i, m²/s² per unit of x_i, summed over every comparison the quantity enters. */
  sensitivity_m2s2: number;
  /** |c_i|·u(x_i), m²/s². */
  contribution_m2s2: number;
  varianceShare: number;
  degreesOfFreedom: number | null;
  /** Comparisons the quantity enters, with its sensitivity in each (in that comparison's y). */
  enters: { comparisonId: string; sensitivity: number }[];
  /** Enters more than one comparison and its sensitivities sum to zero: it cancels exactly. */
  cancels: boolean;
}

export interface ChainCalibration {
  which: 'before' | 'after';
  comparisonId: string;
  /** Calibrated offset of T against R: o = s·(y − L/c²), fractional. */
  offset: number;
  /** Standard uncertainty of o from the inputs the other calibration does not share (or all when alone). */
  unsharedUncertainty: number;
  weight: number;
}

export interface ChainResult {
  /** s·y of the remote comparison (T relative to its partner). */
  yRemote: number;
  /** Weighted side-by-side offset ȳ_s. */
  ySideBySide: number;
  /** y_r − ȳ_s. */
  yChain: number;
  deltaC_m2s2: number;
  standardUncertainty_m2s2: number;
  coverageFactor: number;
  coverageProbability: number;
  expandedUncertainty_m2s2: number;
  /** Welch–Satterthwaite ν_eff; null when infinite. */
  effectiveDegreesOfFreedom: number | null;
  calibrations: ChainCalibration[];
  transport: { standardUncertainty: number; origin: 'entered' | 'before-after'; source: string; degreesOfFreedom: number | null };
  /** Before/after closure: d = o_after − o_before with u(d), U(d) = 2u(d) and E_n = d/U(d). */
  beforeAfter: { difference: number; standardUncertainty: number; expandedUncertainty: number; en: number; agreed: boolean } | null;
  lines: ChainBudgetLine[];
  /** Part of u_c² not shared with any comparison outside the chain (for the adjustment), m²/s²; and the shared rest. */
  own_m2s2: number;
  /** Shared inputs that remain after the cancellation, as ΔC coefficients on σ = c²·u (fractional) or u (m²/s²). */
  shared: { key: string; label: string; sigma_m2s2: number; coefficient: number }[];
  /** Covariance of the chain's ΔC with each comparison's own ΔC = c²·y (JCGM 100:2008 eq. F.2 form: Σ c_i c'_i u_i²). */
  covariances: { comparisonId: string; covariance_m4s4: number; correlation: number }[];
}

/** Transport reproducibility from a before/after difference: rectangular of half-width |d|/2 (JCGM 100:2008 §4.3.7). */
export const transportFromDifference = (d: number) => Math.abs(d) / (2 * Math.sqrt(3));
/** ν of that estimate: G.3 with Δu/u = 0.5 gives ν = ½·(0.5)⁻² = 2 (our judgement of the reliability). */
export const TRANSPORT_FROM_DIFFERENCE_DOF = 2;

/**
 * JCGM 100:2008 eq. (13): u_c² = Σ_i Σ_j c_i c_j u_i u_j r_ij, r_ii = 1 (the double sum written out). For checks of the
 * grouped form and for callers that have correlation coefficients rather than shared keys.
 */
export function correlatedCombinedUncertainty(sensitivities: readonly number[], uncertainties: readonly number[], correlation: (i: number, j: number) => number): number {
  if (sensitivities.length !== uncertainties.length) throw new ScienceInputError('uncertainties', 'needs one per sensitivity');
  let sum = 0;
  for (let i = 0; i < sensitivities.length; i++) {
    for (let j = 0; j < sensitivities.length; j++) {
      const r = i === j ? 1 : correlation(i, j);
      if (!(r >= -1 && r <= 1)) throw new ScienceInputError(`correlation[${i}][${j}]`, 'must lie in [−1, 1]');
      sum += sensitivities[i] * sensitivities[j] * uncertainties[i] * uncertainties[j] * r;
    }
  }
  return Math.sqrt(Math.max(sum, 0));
}

type Quantity = {
  key: string; label: string; type: 'A' | 'B'; unit: string; u: number; dof: number | null;
  /** ∂ΔC/∂x, and the sum of the magnitudes of its parts (the scale against which a cancellation is judged). */
  c: number;
  scale: number;
  enters: { comparisonId: string; sensitivity: number }[];
};

const sign = (c: ChainComparison) => (c.transportableIs === 'B' ? 1 : -1);

function checkComparison(c: ChainComparison, field: string): void {
  if (!Number.isFinite(c.y)) throw new ScienceInputError(`${field}.y`, 'must be a finite number');
  c.terms.forEach((t, i) => {
    if (!(t.standardUncertainty >= 0) || !Number.isFinite(t.standardUncertainty)) throw new ScienceInputError(`${field}.terms[${i}].standardUncertainty`, 'must be a finite non-negative number');
    if (!Number.isFinite(t.sensitivity)) throw new ScienceInputError(`${field}.terms[${i}].sensitivity`, 'must be finite');
    if (t.degreesOfFreedom !== undefined && !(t.degreesOfFreedom > 0)) throw new ScienceInputError(`${field}.terms[${i}].degreesOfFreedom`, 'must be positive');
  });
  if (c.localTie && (!Number.isFinite(c.localTie.deltaC_m2s2) || !(c.localTie.standardUncertainty_m2s2 >= 0))) {
    throw new ScienceInputError(`${field}.localTie`, 'needs a finite ΔC and a non-negative uncertainty');
  }
}

const termKey = (c: ChainComparison, t: ChainInputTerm, i: number) => t.key ?? `own:${c.id}:${i}`;

/** Inputs of a comparison's calibrated offset o = s·(y − L/c²) with their sensitivities ∂o/∂x (fractional). */
function offsetInputs(c: ChainComparison): { key: string; label: string; type: 'A' | 'B'; unit: string; u: number; dof: number | null; d: number; raw: number }[] {
  const s = sign(c);
  const out = c.terms.map((t, i) => ({
    key: termKey(c, t, i), label: t.label, type: t.type, unit: t.unit, u: t.standardUncertainty,
    dof: t.degreesOfFreedom !== undefined && Number.isFinite(t.degreesOfFreedom) ? t.degreesOfFreedom : null, d: s * t.sensitivity, raw: t.sensitivity,
  }));
  if (c.localTie) {
    out.push({ key: c.localTie.key, label: `local tie (${c.localTie.source})`, type: 'B', unit: 'm2/s2', u: c.localTie.standardUncertainty_m2s2, dof: null, d: -s / C2_M2_PER_S2, raw: 0 });
  }
  return out;
}

export function calibrationChain(input: ChainInput): ChainResult {
  const { remote } = input;
  const before = input.before ?? null;
  const after = input.after ?? null;
  if (!before && !after) throw new ScienceInputError('before', 'a chain needs a side-by-side calibration before or after the remote comparison');
  checkComparison(remote, 'remote');
  if (remote.localTie) throw new ScienceInputError('remote.localTie', 'the remote comparison has no local tie');
  if (before) checkComparison(before, 'before');
  if (after) checkComparison(after, 'after');
  const entered = input.transportReproducibility ?? null;
  if (entered && (!(entered.standardUncertainty >= 0) || !Number.isFinite(entered.standardUncertainty))) {
    throw new ScienceInputError('transportReproducibility', 'must be a finite non-negative standard uncertainty');
  }
  const probability = input.coverageProbability ?? COVERAGE_PROBABILITY_K2;

  const cals = ([['before', before], ['after', after]] as const).filter((x): x is ['before' | 'after', ChainComparison] => x[1] !== null);
  const inputsOf = new Map(cals.map(([w, c]) => [w, offsetInputs(c)]));
  const offsetOf = (c: ChainComparison) => sign(c) * (c.y - (c.localTie ? c.localTie.deltaC_m2s2 / C2_M2_PER_S2 : 0));
  // Weights: inverse of the variance each calibration does not share with the other (shared inputs move both alike
  // and say nothing about which is better); equal weights when both are zero.
  const unsharedVar = new Map<string, number>();
  for (const [w] of cals) {
    const other = cals.find(([x]) => x !== w);
    const otherKeys = new Set(other ? inputsOf.get(other[0])!.map((q) => q.key) : []);
    unsharedVar.set(w, inputsOf.get(w)!.filter((q) => !otherKeys.has(q.key)).reduce((s, q) => s + (q.d * q.u) ** 2, 0));
  }
  let weights: Map<string, number>;
  if (cals.length === 1) weights = new Map([[cals[0][0], 1]]);
  else {
    const vb = unsharedVar.get('before')!;
    const va = unsharedVar.get('after')!;
    weights = vb + va > 0 ? new Map([['before', va / (va + vb)], ['after', vb / (va + vb)]]) : new Map([['before', 0.5], ['after', 0.5]]);
  }
  const calibrations: ChainCalibration[] = cals.map(([w, c]) => ({
    which: w, comparisonId: c.id, offset: offsetOf(c), unsharedUncertainty: Math.sqrt(unsharedVar.get(w)!), weight: weights.get(w)!,
  }));

  // Before/after difference d = o_after − o_before, u(d) over grouped inputs (the shared ones cancel).
  let beforeAfter: ChainResult['beforeAfter'] = null;
  if (before && after) {
    const dSens = new Map<string, { c: number; u: number }>();
    for (const [w] of cals) {
      for (const q of inputsOf.get(w)!) {
        const e = dSens.get(q.key) ?? { c: 0, u: q.u };
        e.c += (w === 'after' ? 1 : -1) * q.d;
        dSens.set(q.key, e);
      }
    }
    const d = offsetOf(after) - offsetOf(before);
    const ud = Math.sqrt([...dSens.values()].reduce((s, e) => s + (e.c * e.u) ** 2, 0));
    const Ud = 2 * ud;
    const en = Ud > 0 ? d / Ud : d === 0 ? 0 : Infinity * Math.sign(d);
    beforeAfter = { difference: d, standardUncertainty: ud, expandedUncertainty: Ud, en, agreed: Math.abs(en) <= 1 };
  }

  let transport: ChainResult['transport'];
  if (entered) transport = { standardUncertainty: entered.standardUncertainty, origin: 'entered', source: entered.source, degreesOfFreedom: null };
  else if (beforeAfter) {
    transport = {
      standardUncertainty: transportFromDifference(beforeAfter.difference), origin: 'before-after', degreesOfFreedom: TRANSPORT_FROM_DIFFERENCE_DOF,
      source: 'before/after difference d: u = |d|/(2√3), rectangular of half-width |d|/2 (JCGM 100:2008 §4.3.7)',
    };
  } else throw new ScienceInputError('transportReproducibility', 'with one side-by-side calibration the transport reproducibility must be entered (standard uncertainty and its source)');

  // Grouped input quantities of ΔC = c²·(s_r·y_r − Σ w_j·o_j) + c²·δ_transport.
  const quantities = new Map<string, Quantity>();
  const add = (cmp: ChainComparison, q: { key: string; label: string; type: 'A' | 'B'; unit: string; u: number; dof: number | null; raw: number }, cDeltaC: number) => {
    const e = quantities.get(q.key) ?? { key: q.key, label: q.label, type: q.type, unit: q.unit, u: q.u, dof: q.dof, c: 0, scale: 0, enters: [] };
    if (e.u !== q.u) throw new ScienceInputError(`terms.${q.key}`, `the shared input ${q.key} has different uncertainties in different comparisons (${e.u} and ${q.u})`);
    e.c += cDeltaC;
    e.scale += Math.abs(cDeltaC);
    e.enters.push({ comparisonId: cmp.id, sensitivity: q.raw });
    quantities.set(q.key, e);
  };
  const sr = sign(remote);
  for (const q of offsetInputs(remote)) add(remote, q, C2_M2_PER_S2 * q.d);
  for (const [w, c] of cals) for (const q of inputsOf.get(w)!) add(c, q, -weights.get(w)! * C2_M2_PER_S2 * q.d);
  quantities.set('transport', {
    key: 'transport', label: `transport reproducibility of T (${transport.origin === 'entered' ? transport.source : 'from the before/after difference'})`,
    type: 'B', unit: '1', u: transport.standardUncertainty, dof: transport.degreesOfFreedom, c: C2_M2_PER_S2, scale: C2_M2_PER_S2, enters: [],
  });

  const list = [...quantities.values()];
  // A quantity entering several comparisons whose sensitivities sum to zero (T's budget with w_b + w_a = 1) is set to
  // exactly zero: the sum of floating-point weights would otherwise leave ~1e-16 of it behind.
  const cancelled = (q: Quantity) => q.enters.length > 1 && Math.abs(q.c) <= 1e-12 * q.scale;
  for (const q of list) if (cancelled(q)) q.c = 0;
  const contributions = list.map((q) => Math.abs(q.c) * q.u);
  const uc2 = contributions.reduce((s, x) => s + x * x, 0);
  const uc = Math.sqrt(uc2);
  let denom = 0;
  list.forEach((q, i) => { if (q.dof !== null) denom += contributions[i] ** 4 / q.dof; });
  const nuEff = denom > 0 ? (uc2 * uc2) / denom : Infinity;
  const k = coverageFactorFor(Number.isFinite(nuEff) ? nuEff : Infinity, probability);

  const yRemote = sr * remote.y;
  const ySideBySide = calibrations.reduce((s, c) => s + c.weight * c.offset, 0);
  const yChain = yRemote - ySideBySide;

  const lines: ChainBudgetLine[] = list.map((q, i) => ({
    key: q.key, label: q.label, type: q.type, unit: q.unit, standardUncertainty: q.u, sensitivity_m2s2: q.c,
    contribution_m2s2: contributions[i], varianceShare: uc2 > 0 ? contributions[i] ** 2 / uc2 : 0, degreesOfFreedom: q.dof,
    enters: q.enters, cancels: q.enters.length > 1 && q.c === 0,
  }));

  // Shared with comparisons outside the chain: every keyed input that remains (not own, not transport).
  const shared = list.filter((q) => !q.key.startsWith('own:') && q.key !== 'transport' && q.c !== 0 && q.u > 0).map((q) => {
    const sigma = q.unit === 'm2/s2' ? q.u : C2_M2_PER_S2 * q.u;
    return { key: q.key, label: q.label, sigma_m2s2: sigma, coefficient: sigma > 0 ? (q.c * q.u) / sigma : 0 };
  });
  const sharedVar = shared.reduce((s, t) => s + (t.coefficient * t.sigma_m2s2) ** 2, 0);
  const own = Math.sqrt(Math.max(uc2 - sharedVar, 0));

  // Covariance with each comparison's ΔC = c²·y (its own orientation): Σ_i c_i · c²·∂y/∂x_i · u_i².
  const covariances = [remote, ...cals.map(([, c]) => c)].map((cmp) => {
    let cov = 0;
    let v = 0;
    cmp.terms.forEach((t, i) => {
      const q = quantities.get(termKey(cmp, t, i))!;
      const cc = C2_M2_PER_S2 * t.sensitivity;
      cov += q.c * cc * q.u * q.u;
      v += (cc * t.standardUncertainty) ** 2;
    });
    return { comparisonId: cmp.id, covariance_m4s4: cov, correlation: uc > 0 && v > 0 ? cov / (uc * Math.sqrt(v)) : 0 };
  });

  return {
    yRemote, ySideBySide, yChain, deltaC_m2s2: C2_M2_PER_S2 * yChain, standardUncertainty_m2s2: uc, coverageFactor: k, coverageProbability: probability,
    expandedUncertainty_m2s2: k * uc, effectiveDegreesOfFreedom: Number.isFinite(nuEff) ? nuEff : null, calibrations, transport, beforeAfter, lines,
    own_m2s2: own, shared, covariances,
  };
}
