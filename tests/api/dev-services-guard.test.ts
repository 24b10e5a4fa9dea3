import { spawnSync } from 'node:child_process';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { describe, expect, it } from 'vitest';
import { assertDevServicesAllowed, isLoopbackUrl } from '../../server/dev/guard';

// The demo stand-ins (local identity provider, test mailbox) start only for a loopback PUBLIC_URL, unless
// DEV_SERVICES_OFF_LOOPBACK=1 says so explicitly. Loopback ranges: RFC 1122 §3.2.1.3 (127/8), RFC 4291 §2.5.3 (::1),
// RFC 6761 §6.3 (localhost).
describe('demo stand-ins and PUBLIC_URL', () => {
  it('knows loopback addresses', () => {
    for (const u of ['http://127.0.0.1:8080', 'http://127.10.0.3', 'http://localhost:8080', 'http://[::1]:8080', 'http://app.localhost']) expect(isLoopbackUrl(u), u).toBe(true);
    for (const u of ['https://chronolevel.example.org', 'http://10.0.0.5:8080', 'http://0.0.0.0:8080', 'http://127.0.0.1.example.org', 'not a url']) expect(isLoopbackUrl(u), u).toBe(false);
  });

  it('refuses a public URL unless explicitly enabled', () => {
    expect(() => assertDevServicesAllowed({ publicUrl: 'https://chronolevel.example.org', devServicesOffLoopback: false })).toThrow(/not a loopback address/);
    expect(() => assertDevServicesAllowed({ publicUrl: 'https://chronolevel.example.org', devServicesOffLoopback: true })).not.toThrow();
    expect(() => assertDevServicesAllowed({ publicUrl: 'http://127.0.0.1:8080', devServicesOffLoopback: false })).not.toThrow();
  });

  it('the server process exits before starting anything when PUBLIC_URL is public', () => {
    const secrets = fs.mkdtempSync(path.join(os.tmpdir(), 'clv-guard-'));
    const r = spawnSync(process.execPath, ['--import', 'tsx', 'server/index.ts'], {
      env: { PATH: process.env.PATH, DATABASE_URL: 'postgres://nobody@127.0.0.1:9/none', PUBLIC_URL: 'https://chronolevel.example.org', SECRETS_DIR: secrets, IDP_URL: 'http://127.0.0.1:9', MAILBOX_URL: 'http://127.0.0.1:9', SMTP_URL: 'smtp://127.0.0.1:9' },
      encoding: 'utf8',
      timeout: 60_000,
    });
    fs.rmSync(secrets, { recursive: true, force: true });
    expect(r.status).toBe(1);
    expect(r.stdout + r.stderr).toContain('is not a loopback address');
    expect(r.stdout + r.stderr).not.toContain('local identity provider and test mailbox started');
  });
});
