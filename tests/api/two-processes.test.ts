import { spawn, type ChildProcess } from 'node:child_process';
import crypto from 'node:crypto';
import http from 'node:http';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
// @ts-expect-error plain ESM helper shared with `npm start`
import { freePort } from '../../scripts/lib/postgres.mjs';
import { startHaproxy } from '../helpers/haproxy';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';
import { insertUploadCampaign } from '../helpers/uploads-campaign';

// Two real HTTP processes on one database behind Debian's haproxy (round robin, loopback): nothing that a request
// needs lives in one process's memory. Sign-in through the balancer lands on either process and the session works
// on both; an upload sent to one process shows its progress when polled through the other.
let t: TestApp;
const children: ChildProcess[] = [];
const ports: number[] = [];
let lb: Awaited<ReturnType<typeof startHaproxy>>;

async function startChild(name: string, publicUrl: string): Promise<number> {
  const env = {
    DATABASE_URL: t.databaseUrl, SESSION_SECRET: 'two-process-session-secret-0123456789', PUBLIC_URL: publicUrl,
    IDP_URL: t.config.idpUrl, IDP_CERT_FILE: t.config.idpCertFile, SECRETS_DIR: t.config.secretsDir, LOG_LEVEL: 'silent', NODE_ENV: 'test', TRUST_PROXY: '1',
  };
  const child = spawn(process.execPath, ['--import', 'tsx', 'tests/helpers/upload-server.ts'], {
    env: { ...process.env, CHRONOLEVEL_CHILD_ENV: JSON.stringify(env), CHRONOLEVEL_INSTANCE: name },
    stdio: ['ignore', 'pipe', 'inherit'],
  });
  children.push(child);
  // The child binds a free port itself and says which (no race with other processes for a port picked here).
  return new Promise<number>((resolve, reject) => {
    child.on('exit', (code) => reject(new Error(`HTTP process ${name} exited with ${code}`)));
    child.stdout!.on('data', (d: Buffer) => {
      const m = /LISTENING (\d+)/.exec(d.toString());
      if (m) resolve(Number(m[1]));
    });
  });
}

beforeAll(async () => {
  t = await createTestApp();
  const lbPort = await freePort();
  const publicUrl = `http://127.0.0.1:${lbPort}`;
  ports.push(await startChild('one', publicUrl), await startChild('two', publicUrl));
  lb = await startHaproxy({ port: lbPort, backends: ports });
});
afterAll(async () => {
  await lb?.stop();
  for (const c of children) c.kill('SIGTERM');
  await t.close();
});

/** A browser's cookie jar, enough for the sign-in flow. */
class Jar {
  private cookies = new Map<string, string>();
  take(res: Response) {
    for (const c of res.headers.getSetCookie()) {
      const [pair] = c.split(';');
      const i = pair.indexOf('=');
      this.cookies.set(pair.slice(0, i), pair.slice(i + 1));
    }
  }
  header() {
    return [...this.cookies].map(([k, v]) => `${k}=${v}`).join('; ');
  }
}

describe('two HTTP processes behind haproxy', () => {
  it('a session made by signing in through the balancer works on both processes', async () => {
    const jar = new Jar();
    const login = await fetch(`${lb.url}/auth/saml/login?returnTo=/`, { redirect: 'manual' });
    jar.take(login);
    expect(login.status).toBe(302);
    const idpSso = new URL(login.headers.get('location')!);
    const html = await (await fetch(idpSso)).text();
    const field = (n: string) => new RegExp(`name="${n}" value="([^"]*)"`).exec(html)?.[1] ?? '';
    const form = new URLSearchParams({ requestId: field('requestId'), acsUrl: field('acsUrl'), audience: field('audience'), relayState: field('relayState'), email: 'ines.varga@saltmarsh-lab.invalid' });
    const answer = await (await fetch(`${idpSso.origin}/sso`, { method: 'POST', body: form })).text();
    const samlResponse = /name="SAMLResponse" value="([^"]+)"/.exec(answer)![1];
    const cb = await fetch(`${lb.url}/auth/saml/callback`, {
      method: 'POST', redirect: 'manual', headers: { cookie: jar.header(), 'content-type': 'application/x-www-form-urlencoded' },
      body: new URLSearchParams({ SAMLResponse: samlResponse, RelayState: '/' }),
    });
    expect(cb.status).toBe(303);
    jar.take(cb);
    const servedBy = new Set<string>();
    for (let i = 0; i < 6; i++) {
      const me = await fetch(`${lb.url}/api/v1/me`, { headers: { cookie: jar.header() } });
      expect(me.status).toBe(200);
      expect((await me.json()).email).toBe('ines.varga@saltmarsh-lab.invalid');
      servedBy.add(me.headers.get('x-chronolevel-instance') ?? '');
    }
    expect([...servedBy].sort()).toEqual(['one', 'two']);
    // The same cookie straight at each process, without the balancer.
    for (const p of ports) expect((await fetch(`http://127.0.0.1:${p}/api/v1/me`, { headers: { cookie: jar.header() } })).status).toBe(200);
  });

  it('an upload sent to one process reports its progress through the other', async () => {
    const token = await tokenFor(t, 'ines.varga@saltmarsh-lab.invalid');
    const campaignId = await insertUploadCampaign(t.ds);
    const uploadId = crypto.randomUUID();
    const boundary = `----two${uploadId}`;
    const head = ['epochColumn=1', 'epochKind=mjd', 'valueColumn=2', 'valueKind=offset'].map((f) => {
      const [k, v] = f.split('=');
      return `--${boundary}\r\nContent-Disposition: form-data; name="${k}"\r\n\r\n${v}\r\n`;
    }).join('') + `--${boundary}\r\nContent-Disposition: form-data; name="file"; filename="two.csv"\r\nContent-Type: text/csv\r\n\r\n`;
    const done = new Promise<{ status: number; body: string }>((resolve, reject) => {
      const req = http.request({
        host: '127.0.0.1', port: ports[0], method: 'POST', path: `/api/v1/campaigns/${campaignId}/uploads?uploadId=${uploadId}`,
        headers: { authorization: `Bearer ${token}`, 'content-type': `multipart/form-data; boundary=${boundary}`, 'transfer-encoding': 'chunked' },
      }, (res) => {
        let body = '';
        res.on('data', (c) => (body += c));
        res.on('end', () => resolve({ status: res.statusCode ?? 0, body }));
      });
      req.on('error', reject);
      req.write(head);
      let i = 0;
      const chunk = () => {
        let s = '';
        for (let k = 0; k < 2000; k++, i++) s += `${(61100 + i / 86400).toFixed(9)},${(1e-16 * Math.sin(i)).toExponential(6)}\n`;
        return s;
      };
      let sent = 0;
      const pump = () => {
        if (sent++ < 20) {
          req.write(chunk());
          setTimeout(pump, 60);
        } else req.end(`\r\n--${boundary}--\r\n`);
      };
      pump();
    });
    const poll = () => fetch(`http://127.0.0.1:${ports[1]}/api/v1/uploads/${uploadId}/progress`, { headers: { authorization: `Bearer ${token}` } });
    let seenReceiving = false;
    for (let k = 0; k < 100 && !seenReceiving; k++) {
      const r = await poll();
      if (r.status === 200) {
        const p = await r.json();
        if (p.phase === 'receiving' && p.bytesRead > 0) seenReceiving = true;
      }
      if (!seenReceiving) await new Promise((res) => setTimeout(res, 40));
    }
    expect(seenReceiving).toBe(true);
    const answer = await done;
    expect(answer.status, answer.body.slice(0, 300)).toBe(201);
    const series = JSON.parse(answer.body);
    const final = await (await poll()).json();
    expect(final).toMatchObject({ uploadId, phase: 'done', seriesId: series.id });
    expect(final.rowsProcessed).toBe(40_000);
    // Another person never sees this upload's progress, on either process.
    const other = await tokenFor(t, 'mira.ostrowe@highridge-obs.invalid');
    expect((await fetch(`http://127.0.0.1:${ports[1]}/api/v1/uploads/${uploadId}/progress`, { headers: { authorization: `Bearer ${other}` } })).status).toBe(404);
  });

  it('neither process serves a cached token after a change made through the other or in SQL', async () => {
    const health = async (p: number) => (await (await fetch(`http://127.0.0.1:${p}/api/health`)).json()).tokenCache;
    for (const p of ports) {
      for (let i = 0; i < 200 && (await health(p)) !== 'on'; i++) await new Promise((r) => setTimeout(r, 25));
      expect(await health(p)).toBe('on');
    }
    const admin = await tokenFor(t, 'yusra.holm@geopotential-office.invalid');
    const [{ id: petra }] = await t.ds.query("SELECT id FROM app_user WHERE email = 'petra.lind@audit-bureau.invalid'");
    const secret = await tokenFor(t, 'petra.lind@audit-bureau.invalid');
    const meAt = (p: number, s: string) => fetch(`http://127.0.0.1:${p}/api/v1/me`, { headers: { authorization: `Bearer ${s}` } });
    const patch = (p: number, body: object) => fetch(`http://127.0.0.1:${p}/api/v1/users/${petra}`, {
      method: 'PATCH', headers: { authorization: `Bearer ${admin}`, 'content-type': 'application/json' }, body: JSON.stringify(body),
    });
    for (let round = 0; round < 10; round++) {
      const [one, two] = round % 2 ? [ports[1], ports[0]] : [ports[0], ports[1]];
      for (const p of ports) for (let i = 0; i < 2; i++) expect((await meAt(p, secret)).status).toBe(200); // cached on both
      const role = round % 2 ? 'auditor' : 'coordinator';
      expect((await patch(one, { role })).status).toBe(200);
      expect((await (await meAt(two, secret)).json()).role).toBe(role);
      expect((await (await meAt(one, secret)).json()).role).toBe(role);
    }
    // A change in SQL from a third connection, then revocation and deactivation through one process.
    await t.ds.query("UPDATE app_user SET role = 'coordinator' WHERE id = $1", [petra]);
    for (const p of ports) expect((await (await meAt(p, secret)).json()).role).toBe('coordinator');
    const revoked = await tokenFor(t, 'petra.lind@audit-bureau.invalid');
    for (const p of ports) expect((await meAt(p, revoked)).status).toBe(200);
    const [{ id: revokedId }] = await t.ds.query('SELECT id FROM api_token WHERE user_id = $1 ORDER BY created_at DESC LIMIT 1', [petra]);
    expect((await fetch(`http://127.0.0.1:${ports[0]}/api/v1/admin/tokens/${revokedId}`, { method: 'DELETE', headers: { authorization: `Bearer ${admin}` } })).status).toBe(204);
    expect((await meAt(ports[1], revoked)).status).toBe(401);
    expect((await meAt(ports[1], secret)).status).toBe(200);
    expect((await fetch(`http://127.0.0.1:${ports[1]}/api/v1/users/${petra}/deactivate`, { method: 'POST', headers: { authorization: `Bearer ${admin}` } })).status).toBe(200);
    expect((await meAt(ports[0], secret)).status).toBe(401);
    expect((await meAt(ports[1], secret)).status).toBe(401);
  });
});
