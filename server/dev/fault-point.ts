import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';

// Test-only fault points for the kill harness (tests/api/uploads-kill-harness.test.ts). When armed with a point's
// name (CHRONOLEVEL_FAULT_POINT, never under NODE_ENV=production: config.ts drops it and this module ignores it), the
// process prints `FAULT <name>` on stdout when it reaches that point and pauses there, so the harness can SIGKILL the
// process or stop PostgreSQL at exactly that moment. It resumes when the file resumeFileFor(pid) appears. Unarmed,
// every call is a no-op.

export const FAULT_POINTS = ['before-copy', 'mid-copy', 'raw-file-parts', 'before-commit', 'result-compute', 'certificate-issue'] as const;
/**
 * 'adjustment-run' (after a run's first progress report) is armed by tests/api/worker-kill.test.ts, 'raw-file-committed'
 * (an upload's raw file committed, its own transaction not yet) by tests/api/uploads-raw-file.test.ts; not by the harness.
 */
export type FaultPointName = (typeof FAULT_POINTS)[number] | 'adjustment-run' | 'raw-file-committed';

let armed: string | null = process.env.NODE_ENV === 'production' ? null : (process.env.CHRONOLEVEL_FAULT_POINT ?? null);
const fired = new Set<string>();

/** Arms (or, with undefined, disarms) the fault point from the configuration. */
export function armFaultPoint(name: string | undefined) {
  armed = process.env.NODE_ENV === 'production' ? null : (name ?? null);
}

export const resumeFileFor = (pid: number) => path.join(os.tmpdir(), `chronolevel-fault-resume-${pid}`);

function shouldFire(name: FaultPointName) {
  if (armed !== name || fired.has(name)) return false;
  fired.add(name);
  fs.writeSync(1, `FAULT ${name}\n`);
  return true;
}

/** Pauses the request at this point when armed for it (once per process). */
export async function faultPoint(name: FaultPointName): Promise<void> {
  if (!shouldFire(name)) return;
  const file = resumeFileFor(process.pid);
  while (!fs.existsSync(file)) await new Promise((r) => setTimeout(r, 20));
}

/** Same, for synchronous code (a pure computation): blocks the thread until resumed or killed. */
export function faultPointSync(name: FaultPointName): void {
  if (!shouldFire(name)) return;
  const file = resumeFileFor(process.pid);
  const cell = new Int32Array(new SharedArrayBuffer(4));
  while (!fs.existsSync(file)) Atomics.wait(cell, 0, 0, 20);
}
