import { spawn, spawnSync, type ChildProcess } from 'node:child_process';
import fs from 'node:fs';
import net from 'node:net';
import os from 'node:os';
import path from 'node:path';

// Debian's haproxy in front of several HTTP processes on loopback (round robin), for the topology test and the load
// benchmark. Installed with apt-get when missing and running as root; the project's test scripts install it too.
export function haproxyBinary(): string {
  const find = () => ['/usr/sbin/haproxy', '/usr/bin/haproxy'].find((p) => fs.existsSync(p));
  let bin = find();
  if (!bin && process.getuid?.() === 0) {
    spawnSync('apt-get', ['install', '-y', '-q', 'haproxy'], { stdio: 'inherit', env: { ...process.env, DEBIAN_FRONTEND: 'noninteractive' } });
    bin = find();
  }
  if (!bin) throw new Error("haproxy is missing: install Debian's haproxy package");
  return bin;
}

export type HaproxyServerStats = { name: string; status: string; checksDown: number; downtimeSeconds: number; responses5xx: number; sessions: number };
export type HaproxyStats = { servers: HaproxyServerStats[]; frontend5xx: number; backend5xx: number; noServerAvailable: number };

/**
 * `checkPath` is the health check haproxy sends every 500 ms (default: the liveness check, which does not degrade
 * under load). `statsPort` opens haproxy's statistics page on loopback so a caller can read check failures and which
 * 5xx answers came from the balancer itself rather than from an HTTP process.
 */
export async function startHaproxy(opts: { port: number; backends: number[]; checkPath?: string; statsPort?: number; maxConnPerServer?: number }): Promise<{ url: string; stop: () => Promise<void>; stats: () => Promise<HaproxyStats> }> {
  const dir = fs.mkdtempSync(path.join(os.tmpdir(), 'chronolevel-haproxy-'));
  const cfg = path.join(dir, 'haproxy.cfg');
  fs.writeFileSync(cfg, [
    'global', '  maxconn 4096',
    // `timeout check`: without it haproxy gives a check only `inter` to answer, and a busy event loop misses that.
    // Per-server maxconn lets haproxy queue the excess (timeout queue) instead of piling it onto a process.
    'defaults', '  mode http', '  timeout connect 5s', '  timeout client 120s', '  timeout server 120s', '  timeout check 3s', '  timeout queue 60s', '  option http-keep-alive',
    'frontend api', `  bind 127.0.0.1:${opts.port}`, '  default_backend app',
    ...(opts.statsPort ? ['frontend stats', `  bind 127.0.0.1:${opts.statsPort}`, '  stats enable', '  stats uri /stats'] : []),
    'backend app', '  balance roundrobin', `  option httpchk GET ${opts.checkPath ?? '/api/live'}`, '  http-check expect status 200',
    `  default-server check inter 500ms fall 3 rise 2 maxconn ${opts.maxConnPerServer ?? 32}`,
    ...opts.backends.map((p, i) => `  server app${i} 127.0.0.1:${p}`),
    '',
  ].join('\n'));
  const child: ChildProcess = spawn(haproxyBinary(), ['-f', cfg, '-db'], { stdio: ['ignore', 'ignore', 'pipe'] });
  let err = '';
  child.stderr!.on('data', (d: Buffer) => (err += d.toString()));
  // Ready when the frontend accepts connections.
  const deadline = Date.now() + 10_000;
  for (;;) {
    const ok = await new Promise<boolean>((resolve) => {
      const s = net.connect(opts.port, '127.0.0.1', () => {
        s.destroy();
        resolve(true);
      });
      s.on('error', () => resolve(false));
    });
    if (ok) break;
    if (child.exitCode !== null || Date.now() > deadline) throw new Error(`haproxy did not start: ${err.slice(-500)}`);
    await new Promise((r) => setTimeout(r, 100));
  }
  // Let the health checks mark every backend up.
  await new Promise((r) => setTimeout(r, 1200));
  const stats = async (): Promise<HaproxyStats> => {
    if (!opts.statsPort) throw new Error('haproxy was started without statsPort');
    const csv = await (await fetch(`http://127.0.0.1:${opts.statsPort}/stats;csv`)).text();
    const [head, ...rows] = csv.replace(/^# /, '').trim().split('\n').map((l) => l.split(','));
    const col = (row: string[], name: string) => row[head.indexOf(name)] ?? '';
    const num = (row: string[], name: string) => Number(col(row, name) || 0);
    const app = rows.filter((r) => col(r, 'pxname') === 'app');
    const backend = app.find((r) => col(r, 'svname') === 'BACKEND');
    const frontend = rows.find((r) => col(r, 'pxname') === 'api' && col(r, 'svname') === 'FRONTEND');
    const servers = app.filter((r) => col(r, 'svname').startsWith('app')).map((r) => ({
      name: col(r, 'svname'), status: col(r, 'status'), checksDown: num(r, 'chkdown'), downtimeSeconds: num(r, 'downtime'),
      responses5xx: num(r, 'hrsp_5xx'), sessions: num(r, 'stot'),
    }));
    const backend5xx = backend ? num(backend, 'hrsp_5xx') : 0;
    // 5xx answers that no HTTP process sent: haproxy's own "no server is available" (503) and the like
    const frontend5xx = frontend ? num(frontend, 'hrsp_5xx') : 0;
    return { servers, frontend5xx, backend5xx, noServerAvailable: frontend5xx - servers.reduce((a, s) => a + s.responses5xx, 0) };
  };
  return {
    stats,
    url: `http://127.0.0.1:${opts.port}`,
    stop: async () => {
      child.kill('SIGTERM');
      await new Promise((r) => setTimeout(r, 200));
      fs.rmSync(dir, { recursive: true, force: true });
    },
  };
}
