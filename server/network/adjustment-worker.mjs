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
 * JSON.stringify(result), with each long top-level array (observations, points) written in slices and a progress report
 * between them, so that a result of 300 000 observations does not leave a silent second or two.
 */
function stringifyInChunks(result) {
  const SLICE = 10_000;
  const parts = [];
  for (const [key, value] of Object.entries(result)) {
    if (value === undefined) continue;
    parts.push(parts.length ? ',' : '{', JSON.stringify(key), ':');
    if (!Array.isArray(value) || value.length <= SLICE) {
      parts.push(JSON.stringify(value));
      continue;
    }
    parts.push('[');
    for (let i = 0; i < value.length; i += SLICE) {
      parts.push(i > 0 ? ',' : '', JSON.stringify(value.slice(i, i + SLICE)).slice(1, -1));
      parentPort.postMessage({ type: 'progress', fraction: 1, stage: 'preparing results' });
    }
    parts.push(']');
  }
  parts.push(parts.length ? '}' : '{}');
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
