// Worker-thread entry of an adjustment run (started by server/network/adjustment-thread.ts). Loads the run-result
// module through tsx, adjusts, posts progress at most every 100 ms (and at every change of stage), then the result as
// JSON text in pieces (stringified here, off the job's event loop) or the adjustment's input error as data.
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
 * Posts JSON.stringify(result) in pieces ('chunk' messages, joined by the job): each long top-level array (observations,
 * points) is written in slices with a progress report between them, so that a result of 300 000 observations leaves no
 * silent second and the thread never holds the whole text.
 */
function postResultInChunks(result) {
  const SLICE = 10_000;
  let first = true;
  const post = (text) => parentPort.postMessage({ type: 'chunk', text });
  for (const [key, value] of Object.entries(result)) {
    if (value === undefined) continue;
    const lead = `${first ? '{' : ','}${JSON.stringify(key)}:`;
    first = false;
    if (!Array.isArray(value) || value.length <= SLICE) {
      post(lead + JSON.stringify(value));
      continue;
    }
    for (let i = 0; i < value.length; i += SLICE) {
      const slice = JSON.stringify(value.slice(i, i + SLICE)).slice(1, -1);
      post((i === 0 ? `${lead}[` : ',') + slice + (i + SLICE >= value.length ? ']' : ''));
      parentPort.postMessage({ type: 'progress', fraction: 1, stage: 'preparing results' });
    }
  }
  post(first ? '{}' : '}');
}

try {
  onProgress(0, 'reading inputs');
  let inputs = JSON.parse(workerData.inputsJson);
  const result = computeRunResult(inputs, onProgress);
  inputs = null; // the network's objects may go before the result is written out
  parentPort.postMessage({ type: 'progress', fraction: 1, stage: 'statistical tests' });
  const summary = {
    sigma0: result.sigma0, degreesOfFreedom: result.degreesOfFreedom,
    globalTestPassed: result.globalTest?.passed ?? null, suspects: result.snooping.suspects.length,
  };
  postResultInChunks(result);
  parentPort.postMessage({ type: 'done', summary });
} catch (e) {
  if (e instanceof AdjustmentInputError) parentPort.postMessage({ type: 'failed', message: e.message, detail: e.detail });
  else parentPort.postMessage({ type: 'failed', message: e instanceof Error ? e.message : String(e) });
}
