import { describe, expect, it } from 'vitest';
import { adjustNetwork, type AdjustmentStage } from '../../../server/science/adjustment/gauss-markov';
import { throttledProgress } from '../../../server/jobs/progress';
import { gridNetwork } from './network-fixtures';

// Progress of a large adjustment is reported inside the long stages, not once per stage, so the job can write it at
// least every second while the thread computes (the product's target for 10⁵ benchmarks).
describe('adjustment progress', () => {
  it('reports many times inside ordering, factorisation and selected inversion, never going back', () => {
    const net = gridNetwork(99, 20_000);
    const reports: { fraction: number; stage: AdjustmentStage }[] = [];
    const res = adjustNetwork({ points: net.points, observations: net.observations, options: { onProgress: (fraction, stage) => reports.push({ fraction, stage }) } });
    expect(res.snooping.removals.length).toBeGreaterThan(0);
    const count = (s: AdjustmentStage) => reports.filter((r) => r.stage === s).length;
    // 20 000 unknowns: every 1024 pivots of the ordering, every 256 columns of factor and inverse.
    expect(count('ordering')).toBeGreaterThanOrEqual(19);
    expect(count('factorisation')).toBeGreaterThanOrEqual(78);
    expect(count('selected inversion')).toBeGreaterThanOrEqual(78);
    expect(count('outlier screening')).toBeGreaterThanOrEqual(res.snooping.removals.length);
    for (let i = 1; i < reports.length; i++) expect(reports[i].fraction).toBeGreaterThanOrEqual(reports[i - 1].fraction);
    expect(reports.at(-1)!.fraction).toBe(1);
  });
});

describe('throttled progress writes', () => {
  it('writes at most one report per interval, one at a time, and the last one on flush', async () => {
    const written: { at: number; fraction: number; stage: string }[] = [];
    let inFlight = 0;
    let maxInFlight = 0;
    const p = throttledProgress(async (fraction, stage) => {
      inFlight++;
      maxInFlight = Math.max(maxInFlight, inFlight);
      written.push({ at: Date.now(), fraction, stage });
      await new Promise((r) => setTimeout(r, 5));
      inFlight--;
    }, 50);
    for (let i = 1; i <= 300; i++) {
      p.report(i / 300, i < 150 ? 'first' : 'second');
      if (i % 10 === 0) await new Promise((r) => setTimeout(r, 5));
    }
    await p.flush();
    expect(maxInFlight).toBe(1);
    expect(written.at(-1)).toMatchObject({ fraction: 1, stage: 'second' });
    expect(written.length).toBeLessThan(300 / 10);
    expect(written.length).toBeGreaterThan(1);
    for (let i = 2; i < written.length - 1; i++) expect(written[i].at - written[i - 1].at).toBeGreaterThanOrEqual(45);
  });
});
