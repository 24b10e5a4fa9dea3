import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { Worker } from 'node:worker_threads';
import { AdjustmentInputError, type AdjustmentInputErrorDetail } from '../science/adjustment/gauss-markov';

// An adjustment run's numeric work happens in a worker thread of its own, never on the job's event loop: the loop stays
// free to write the progress the thread posts while it computes. One thread per run, ended when the run ends (done,
// failed or abandoned by stopAdjustmentThreads), so no thread outlives its run.

const workerFile = path.join(path.dirname(fileURLToPath(import.meta.url)), 'adjustment-worker.mjs');
const live = new Set<Worker>();

/** The thread was ended by stopAdjustmentThreads (worker shutdown): the run is left to a retry of its job. */
export class AdjustmentThreadStopped extends Error {
  constructor() {
    super('the adjustment thread was stopped with its worker');
    this.name = 'AdjustmentThreadStopped';
  }
}
const stopped = new WeakSet<Worker>();

export type RunSummary = { sigma0: number | null; degreesOfFreedom: number; globalTestPassed: boolean | null; suspects: number };
type ThreadMessage =
  | { type: 'progress'; fraction: number; stage: string }
  | { type: 'chunk'; text: string }
  | { type: 'done'; summary: RunSummary }
  | { type: 'failed'; message: string; detail?: AdjustmentInputErrorDetail };

/**
 * Adjusts a run's stored inputs (their JSON text, parsed in the thread) and answers the result as JSON text with the
 * figures the run row keeps; `onProgress` gets the thread's reports (about every 100 ms). An input error of the
 * adjustment comes back as AdjustmentInputError.
 */
export function runInThread(inputsJson: string, onProgress: (fraction: number, stage: string) => void): Promise<{ resultJson: string; summary: RunSummary }> {
  return new Promise((resolve, reject) => {
    const worker = new Worker(workerFile, { workerData: { inputsJson } });
    live.add(worker);
    let settled = false;
    let chunks: string[] = [];
    const settle = (f: () => void) => {
      if (settled) return;
      settled = true;
      live.delete(worker);
      void worker.terminate();
      f();
    };
    worker.on('message', (m: ThreadMessage) => {
      if (m.type === 'progress') onProgress(m.fraction, m.stage);
      else if (m.type === 'chunk') chunks.push(m.text);
      else if (m.type === 'done') {
        const resultJson = chunks.join('');
        chunks = [];
        settle(() => resolve({ resultJson, summary: m.summary }));
      }
      else settle(() => reject(m.detail ? new AdjustmentInputError(m.message, m.detail) : new Error(m.message)));
    });
    worker.on('error', (e) => settle(() => reject(e)));
    worker.on('exit', (code) => settle(() => reject(stopped.has(worker) ? new AdjustmentThreadStopped() : new Error(`the adjustment thread ended early (exit code ${code})`))));
  });
}

/** Number of adjustment threads running (for tests and shutdown). */
export function adjustmentThreadCount(): number {
  return live.size;
}

/** Ends every adjustment thread of this process (worker shutdown); their jobs fail and are retried, the runs stay open. */
export async function stopAdjustmentThreads(): Promise<void> {
  const all = [...live];
  for (const w of all) stopped.add(w);
  await Promise.all(all.map((w) => w.terminate()));
}
