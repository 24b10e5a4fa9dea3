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

/**
 * JSON.stringify(result), with the (long) observations array written in slices and a progress report between them,
 * so that a result of 300 000 observations does not leave a silent second or two.
 */
function stringifyInChunks(result) {
  const { observations, ...rest } = result;
  const head = JSON.stringify(rest);
  const parts = [head.slice(0, -1), head.length > 2 ? ',"observations":[' : '"observations":['];
  for (let i = 0; i < observations.length; i += 20_000) {
    const slice = JSON.stringify(observations.slice(i, i + 20_000));
    parts.push(i > 0 ? ',' : '', slice.slice(1, -1));
    parentPort.postMessage({ type: 'progress', fraction: 1, stage: 'preparing results' });
  }
  parts.push(']}');
  return parts.join('');
}

try {
  onProgress(0, 'reading inputs');
  const inputs = JSON.parse(workerData.inputsJson);
  const result = computeRunResult(inputs, onProgress);
  parentPort.postMessage({ type: 'progress', fraction: 1, stage: 'statistical tests' });
  const summary = {
    sigma0: result.sigma0, degreesOfFreedom: result.degreesOfFreedom,
    globalTestPassed: result.globalTest?.passed ?? null, suspects: result.snooping.suspects.length,
  };
  parentPort.postMessage({ type: 'done', resultJson: stringifyInChunks(result), summary });
} catch (e) {
  if (e instanceof AdjustmentInputError) parentPort.postMessage({ type: 'failed', message: e.message, detail: e.detail });
  else parentPort.postMessage({ type: 'failed', message: e instanceof Error ? e.message : String(e) });
}
