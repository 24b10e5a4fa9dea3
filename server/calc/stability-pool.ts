import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { Piscina } from 'piscina';
import { ScienceInputError } from '../science/errors';
import type { StabilityInput, StabilityPoint } from '../science/stability';

// Heavy stability analyses run in worker threads (piscina), never on the HTTP event loop. The science stays the pure
// module server/science/stability.ts; the worker only calls it. One small pool per process, started on first use;
// idle threads end after a while, so an idle process (or a test run) holds none.
const workerFile = path.join(path.dirname(fileURLToPath(import.meta.url)), 'stability-worker.mjs');
let pool: Piscina | null = null;
let threads = 1;

/** Sets the number of worker threads (STABILITY_WORKERS); takes effect when the pool is next started. */
export function configureStabilityPool(maxThreads: number) {
  threads = maxThreads;
}

type WorkerAnswer = { ok: true; points: StabilityPoint[] } | { ok: false; field: string; message: string };

export async function stabilityInWorker(input: StabilityInput & { y?: Float64Array; x?: Float64Array }): Promise<StabilityPoint[]> {
  pool ??= new Piscina({ filename: workerFile, minThreads: 0, maxThreads: threads, idleTimeout: 5_000, maxQueue: 64 });
  const transfer = [input.y?.buffer, input.x?.buffer].filter((b): b is ArrayBuffer => b instanceof ArrayBuffer);
  const answer = (await pool.run(input, { transferList: transfer })) as WorkerAnswer;
  if (!answer.ok) throw new ScienceInputError(answer.field, answer.message.startsWith(`${answer.field}: `) ? answer.message.slice(answer.field.length + 2) : answer.message);
  return answer.points;
}

/** Ends the worker threads (process shutdown). */
export async function closeStabilityPool() {
  const p = pool;
  pool = null;
  await p?.destroy();
}
