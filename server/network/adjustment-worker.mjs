// Worker-thread entry of an adjustment run (started by server/network/adjustment-thread.ts). Loads the run-result
// module through tsx, adjusts, posts progress at most every 100 ms (and at every change of stage), then the result as
// JSON text (stringified here, off the job's event loop) or the adjustment's input error as data.
import { parentPort, workerData } from 'node:worker_threads';
import { register } from 'tsx/esm/api';

register();
const { computeRunResult } = await import('./run-result.ts');
const { AdjustmentInputError } = await import('../science/adjustment/gauss-markov.ts');

let lastPost = 0;
let lastStage = '';
const onProgress = (fraction, stage) => {
  const now = performance.now();
  if (stage === lastStage && now - lastPost < 100) return;
  lastPost = now;
  lastStage = stage;
  parentPort.postMessage({ type: 'progress', fraction, stage });
};

try {
  onProgress(0, 'reading inputs');
  const inputs = JSON.parse(workerData.inputsJson);
  const result = computeRunResult(inputs, onProgress);
  parentPort.postMessage({ type: 'progress', fraction: 1, stage: 'statistical tests' });
  const summary = {
    sigma0: result.sigma0, degreesOfFreedom: result.degreesOfFreedom,
    globalTestPassed: result.globalTest?.passed ?? null, suspects: result.snooping.suspects.length,
  };
  parentPort.postMessage({ type: 'done', resultJson: JSON.stringify(result), summary });
} catch (e) {
  if (e instanceof AdjustmentInputError) parentPort.postMessage({ type: 'failed', message: e.message, detail: e.detail });
  else parentPort.postMessage({ type: 'failed', message: e instanceof Error ? e.message : String(e) });
}
