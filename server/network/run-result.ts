import type { RunResult } from '../../shared/network';
import { adjustNetwork, type AdjustmentStage } from '../science/adjustment/gauss-markov';
import { meanNormalGravity, normalHeightFromC } from '../science/normal-gravity';
import type { StoredInputs } from './adjustment.service';

// The adjustment of one run's stored inputs, shaped for storage. No database here: the job runs it in a worker
// thread (server/network/adjustment-thread.ts), the seeds and tests call it directly.

/** A stored (JSON) lookup table read by a key that may be anything a person typed: own properties only. */
function ownValue<T>(table: Record<string, T>, key: string): T | undefined {
  return Object.hasOwn(table, key) ? table[key] : undefined;
}
/** Runs the adjustment on stored inputs and shapes the result for storage (pure apart from the clock). */
export function computeRunResult(inputs: StoredInputs, onProgress?: (fraction: number, stage: AdjustmentStage) => void): RunResult {
  const t0 = performance.now();
  const res = adjustNetwork({ ...inputs.adjustment, options: { ...inputs.adjustment.options, onProgress } });
  onProgress?.(1, 'statistical tests');
  const points = res.points.map((p) => {
    const meta = ownValue(inputs.pointMeta, p.code);
    if (!meta) throw new Error(`stored inputs lack the point ${p.code}`);
    const h = normalHeightFromC(p.c, meta.latitudeDeg);
    return {
      code: p.code, kind: meta.kind, label: meta.label, datumName: meta.datumName, latitudeDeg: meta.latitudeDeg,
      c_m2s2: p.c, sigmaC_m2s2: p.sigma, normalHeightM: h, sigmaHeightM: p.sigma / meanNormalGravity(meta.latitudeDeg, h),
      datum: p.datum, knownC_m2s2: p.knownC ?? null,
    };
  });
  onProgress?.(1, 'statistical tests');
  const observations = res.observations.map((o) => ({
    id: o.id ?? String(o.index), kind: o.kind, from: o.from, to: o.to, label: ownValue(inputs.observationMeta, o.id ?? '')?.label ?? `${o.from} → ${o.to}`,
    deltaC_m2s2: o.deltaC, sigma_m2s2: inputs.adjustment.observations[o.index].sigma, residual_m2s2: o.residual, redundancy: o.redundancy,
    standardizedResidual: o.standardizedResidual, suspected: o.suspected, removedAtStep: o.removedAtStep, sharedEffect_m2s2: o.sharedEffect,
  }));
  const g = 9.81;
  // σ policy: a-priori σ (σ0 = 1) unless the global test rejects a too-large vᵀPv; then σ·σ̂0 (common practice:
  // the a-priori weights are then too optimistic; never scaled down when σ̂0 < 1).
  const scaleApplied = !!(res.globalTest && res.globalTest.statistic > res.globalTest.upper && res.sigma0 !== null);
  const factor = scaleApplied ? (res.sigma0 as number) : 1;
  const labelOf = (s: { id?: string; code?: string; from?: string; to?: string; source: string }) =>
    s.source === 'observation' ? ownValue(inputs.observationMeta, s.id ?? '')?.label ?? `${s.from} → ${s.to}` : `fixed point ${s.code}`;
  return {
    points, observations,
    datumOffsets: res.datumOffsets.map((d) => ({ name: d.name, value_m2s2: d.value, sigma_m2s2: d.sigma, valueMm: (d.value / g) * 1000, sigmaMm: (d.sigma / g) * 1000 })),
    unknowns: res.unknowns, degreesOfFreedom: res.degreesOfFreedom, vtpv: res.vtpv, sigma0: res.sigma0,
    globalTest: res.globalTest ? { statistic: res.globalTest.statistic, lower: res.globalTest.lower, critical: res.globalTest.critical, alpha: res.globalTest.alpha, passed: res.globalTest.passed } : null,
    snooping: {
      alpha0: res.snooping.alpha0, criticalValue: res.snooping.criticalValue,
      suspects: res.snooping.removals.map((s) => ({ id: s.id ?? s.code ?? String(s.index), label: labelOf(s), standardizedResidual: s.standardizedResidual, step: s.step })),
      stoppedEarly: res.snooping.stoppedEarly,
      initial: { sigma0: res.snooping.initial.sigma0, degreesOfFreedom: res.snooping.initial.degreesOfFreedom, globalTestPassed: res.snooping.initial.globalTest?.passed ?? null },
    },
    redundancySum: res.observations.reduce((a, o) => a + (o.removedAtStep === null ? o.redundancy : 0), 0) + res.fixedPointObservations.reduce((a, o) => a + (o.removedAtStep === null ? o.redundancy : 0), 0),
    elapsedMs: performance.now() - t0,
    sharedParameters: res.sharedParameters.map((p) => ({
      name: p.name, label: inputs.sharedLabels?.[p.name] ?? p.name, value_m2s2: p.value, sigma_m2s2: p.sigma, priorSigma_m2s2: p.priorSigma, observations: p.observations,
    })),
    differences: res.differences.map((d) => ({ from: d.from, to: d.to, deltaC_m2s2: d.deltaC, sigma_m2s2: d.sigma, sigmaIgnoringCovariance_m2s2: d.sigmaIgnoringCovariance })),
    sigmaScale: {
      applied: scaleApplied, factor,
      rule: 'σ on the a-priori scale (σ0 = 1) unless the global χ² test rejects a too-large vᵀPv; then every σ is multiplied by σ̂0.',
    },
    referenceDatum: inputs.referenceDatum ?? null,
    tideConversions: (inputs.tideConversions ?? []).map((t) => ({ label: t.label, from: t.from, to: t.to, shift_m2s2: t.shift_m2s2 })),
    excluded: inputs.excluded ?? [],
    entered: inputs.entered,
  };
}

