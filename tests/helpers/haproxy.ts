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

export async function startHaproxy(opts: { port: number; backends: number[] }): Promise<{ url: string; stop: () => Promise<void> }> {
  const dir = fs.mkdtempSync(path.join(os.tmpdir(), 'chronolevel-haproxy-'));
  const cfg = path.join(dir, 'haproxy.cfg');
  fs.writeFileSync(cfg, [
    'global', '  maxconn 4096',
    'defaults', '  mode http', '  timeout connect 5s', '  timeout client 120s', '  timeout server 120s', '  option http-keep-alive',
    'frontend api', `  bind 127.0.0.1:${opts.port}`, '  default_backend app',
    'backend app', '  balance roundrobin', '  option httpchk GET /api/health', '  http-check expect status 200',
    ...opts.backends.map((p, i) => `  server app${i} 127.0.0.1:${p} check inter 500ms`),
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
  return {
    url: `http://127.0.0.1:${opts.port}`,
    stop: async () => {
      child.kill('SIGTERM');
      await new Promise((r) => setTimeout(r, 200));
      fs.rmSync(dir, { recursive: true, force: true });
    },
  };
}
