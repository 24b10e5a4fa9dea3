import fs from 'node:fs';
import os from 'node:os';

// One line per headline figure, machine-readable, for the table `npm run bench` prints at the end. The 1-minute load
// average at the moment of measuring goes with every figure (the machine may be shared).
export type Figure = { figure: string; measured: string; target: string; met: boolean | null; /** load average when measured, if not now */ load?: number };

export function reportFigure(f: Figure): void {
  console.log(`::figure:: ${JSON.stringify({ ...f, load: f.load ?? Number(os.loadavg()[0].toFixed(2)) })}`);
}

export function peakRssMb(pid: number | 'self'): number {
  const status = fs.readFileSync(`/proc/${pid}/status`, 'utf8');
  return Number(/VmHWM:\s+(\d+)/.exec(status)?.[1] ?? 0) / 1024;
}
