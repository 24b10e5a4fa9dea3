import { spawn, type ChildProcess } from 'node:child_process';
import crypto from 'node:crypto';
import fs from 'node:fs';
import http from 'node:http';
import os from 'node:os';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';
import { insertUploadCampaign } from '../helpers/uploads-campaign';

// The server process dies (SIGKILL) in the middle of a large upload: afterwards no series, no sample, no raw file and no spool file of that upload may exist.
let t: TestApp;
let child: ChildProcess | null = null;

beforeAll(async () => {
  t = await createTestApp();
});
afterAll(async () => {
  child?.kill('SIGKILL');
  await t.close();
});

const spoolFiles = () => fs.readdirSync(os.tmpdir()).filter((f) => f.startsWith('chronolevel-upload-'));

describe('server killed during an upload', () => {
  it('leaves no partial series behind', async () => {
    const token = await tokenFor(t, 'ines.varga@saltmarsh-lab.invalid');
    const campaignId = await insertUploadCampaign(t.ds);
    const appName = `upload-kill-${crypto.randomBytes(4).toString('hex')}`;
    const env = {
      DATABASE_URL: `${t.databaseUrl}?application_name=${appName}`, SESSION_SECRET: 'kill-test-session-secret-0123456789',
      IDP_CERT_FILE: t.config.idpCertFile, SECRETS_DIR: t.config.secretsDir, LOG_LEVEL: 'silent', NODE_ENV: 'test',
    };
    child = spawn(process.execPath, ['--import', 'tsx', 'tests/helpers/upload-server.ts'], { env: { ...process.env, CHRONOLEVEL_CHILD_ENV: JSON.stringify(env) }, stdio: ['ignore', 'pipe', 'inherit'] });
    const port: number = await new Promise((resolve) => child!.stdout!.on('data', (d: Buffer) => {
      const m = /LISTENING (\d+)/.exec(d.toString());
      if (m) resolve(Number(m[1]));
    }));
    const spoolsBefore = spoolFiles();
    const countsSql = `SELECT (SELECT count(*)::int FROM ratio_series) AS series, (SELECT count(*)::int FROM ratio_sample) AS samples,
      (SELECT count(*)::int FROM ratio_series_file) AS files`;
    const [before] = await t.ds.query(countsSql);
    const uploadId = crypto.randomUUID();
    const boundary = `----kill${uploadId}`;
    const head = ['epochColumn=1', 'epochKind=mjd', 'valueColumn=2', 'valueKind=offset'].map((f) => {
      const [k, v] = f.split('=');
      return `--${boundary}\r\nContent-Disposition: form-data; name="${k}"\r\n\r\n${v}\r\n`;
    }).join('') + `--${boundary}\r\nContent-Disposition: form-data; name="file"; filename="big.csv"\r\nContent-Type: text/csv\r\n\r\n`;
    const req = http.request({
      host: '127.0.0.1', port, method: 'POST', path: `/api/v1/campaigns/${campaignId}/uploads?uploadId=${uploadId}`,
      headers: { authorization: `Bearer ${token}`, 'content-type': `multipart/form-data; boundary=${boundary}`, 'transfer-encoding': 'chunked' },
    });
    req.on('error', () => undefined); // the server goes away mid-request
    req.write(head);
    // Stream rows slowly until the server reports that it has written some into the COPY.
    let i = 0;
    const rows = (n: number) => {
      let s = '';
      for (let k = 0; k < n; k++, i++) s += `${(61100 + i / 86400).toFixed(9)},${(1e-16 * Math.sin(i)).toExponential(6)}\n`;
      return s;
    };
    let processed = 0;
    for (let round = 0; round < 200 && processed < 50_000; round++) {
      req.write(rows(10_000));
      await new Promise((r) => setTimeout(r, 30));
      const p = await fetch(`http://127.0.0.1:${port}/api/v1/uploads/${uploadId}/progress`, { headers: { authorization: `Bearer ${token}` } });
      if (p.ok) processed = ((await p.json()) as { rowsProcessed: number }).rowsProcessed;
    }
    expect(processed).toBeGreaterThanOrEqual(50_000);
    // while the upload is in flight its spool file exists but has no name; a live backend holds the open COPY
    expect(spoolFiles()).toEqual(spoolsBefore);
    const live = await t.ds.query('SELECT count(*)::int AS n FROM pg_stat_activity WHERE application_name = $1', [appName]);
    expect(live[0].n).toBeGreaterThan(0);

    child.kill('SIGKILL');
    await new Promise((r) => child!.once('exit', r));
    req.destroy();
    // PostgreSQL notices the dropped connection and rolls the transaction back.
    for (let k = 0; k < 100; k++) {
      const [{ n }] = await t.ds.query('SELECT count(*)::int AS n FROM pg_stat_activity WHERE application_name = $1', [appName]);
      if (n === 0) break;
      await new Promise((r) => setTimeout(r, 100));
    }
    const [{ n: backends }] = await t.ds.query('SELECT count(*)::int AS n FROM pg_stat_activity WHERE application_name = $1', [appName]);
    expect(backends).toBe(0);
    const [after] = await t.ds.query(countsSql);
    expect(after).toEqual(before);
    const [{ n: ofCampaign }] = await t.ds.query('SELECT count(*)::int AS n FROM ratio_series WHERE campaign_id = $1', [campaignId]);
    expect(ofCampaign).toBe(0);
    expect(spoolFiles()).toEqual(spoolsBefore);
  });
});
