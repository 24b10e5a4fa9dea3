import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startWorker, type Worker } from '../../server/jobs/worker';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';

// A GET never writes: reading a result answers the stored one for the current inputs, or says why there is none.
// Computation happens after an upload, an acceptance or a request to recompute (POSTs), as a job run by the worker.
let t: TestApp;
let worker: Worker | null = null;
let campaignId: string;
const tokens: Record<string, string> = {};
const auth = (who: 'ines' | 'ansel' | 'petra') => ({ authorization: `Bearer ${tokens[who]}` });

async function counts() {
  const [r] = await t.ds.query(`SELECT (SELECT count(*) FROM comparison_result)::int AS results, (SELECT count(*) FROM audit_event)::int AS audit,
    (SELECT count(*) FROM result_request)::int AS requests, to_regclass('pgboss.job') IS NOT NULL AS queue`);
  // the job table exists once the queue was first used
  const jobs = r.queue ? ((await t.ds.query('SELECT count(*)::int AS n FROM pgboss.job'))[0].n as number) : 0;
  return { results: r.results as number, audit: r.audit as number, requests: r.requests as number, jobs };
}

/** Polls the GET (as a client would) until the worker has stored the result. */
async function resultOnceComputed(id: string) {
  for (let i = 0; i < 240; i++) {
    const res = await request(t.app).get(`/api/v1/campaigns/${id}/result`).set(auth('ines'));
    if (res.status === 200) return res;
    expect(res.status).toBe(404);
    expect(['result-pending'], JSON.stringify(res.body)).toContain(res.body.code);
    await new Promise((r) => setTimeout(r, 250));
  }
  throw new Error('the worker never stored the result');
}

beforeAll(async () => {
  t = await createTestApp();
  tokens.ines = await tokenFor(t, 'ines.varga@saltmarsh-lab.invalid');
  tokens.ansel = await tokenFor(t, 'ansel.brandt@geopotential-office.invalid');
  tokens.petra = await tokenFor(t, 'petra.lind@audit-bureau.invalid');
  const rows: { id: string; name: string }[] = await t.ds.query("SELECT id, name FROM campaign WHERE state = 'draft' ORDER BY name");
  campaignId = rows.find((r) => r.name.startsWith('SCL–HMO'))!.id;
});
afterAll(async () => {
  await worker?.stop();
  await t.close();
});

describe('reading a result writes nothing', () => {
  it('an auditor and lab staff reading every campaign result (and its CSV) add no result, audit event, request or job', async () => {
    const campaigns: { id: string }[] = await t.ds.query('SELECT id FROM campaign');
    const before = await counts();
    for (const [c, who] of campaigns.flatMap((x) => (['petra', 'ines'] as const).map((w) => [x, w] as const))) {
      const res = await request(t.app).get(`/api/v1/campaigns/${c.id}/result`).set(auth(who));
      expect([200, 404]).toContain(res.status);
      // 404: no current result, or a campaign auditors do not see (a draft)
      if (res.status === 404) expect(['result-not-computed', 'result-failed', 'result-pending', 'not-found']).toContain(res.body.code);
      await request(t.app).get(`/api/v1/campaigns/${c.id}/result.csv`).set(auth(who));
    }
    expect(await counts()).toEqual(before);
  });

  it('after an upload the result is queued (GET says pending), the worker computes it once, and GET then answers it', async () => {
    const lines = ['mjd,ratio'];
    for (let i = 0; i < 2000; i++) lines.push(`${(61_416 + i / 8640).toFixed(9)},1.0000000000000${String(640000 + (i % 7)).padStart(7, '0')}`);
    const up = await request(t.app).post(`/api/v1/campaigns/${campaignId}/uploads`).set(auth('ines'))
      .field('epochColumn', '1').field('epochKind', 'mjd').field('valueColumn', '2').field('valueKind', 'ratio').field('hasHeader', 'true')
      .attach('file', Buffer.from(lines.join('\n') + '\n'), 'queued-run.csv');
    expect(up.status, JSON.stringify(up.body)).toBe(201);
    const [req] = await t.ds.query('SELECT state, reason FROM result_request WHERE campaign_id = $1', [campaignId]);
    expect(req).toEqual({ state: 'queued', reason: 'upload' });

    const before = await counts();
    const pending = await request(t.app).get(`/api/v1/campaigns/${campaignId}/result`).set(auth('ines'));
    expect(pending.status).toBe(404);
    expect(pending.headers['content-type']).toContain('application/problem+json');
    expect(pending.body).toMatchObject({ code: 'result-pending', request: { state: 'queued', reason: 'upload' }, retryAfterSeconds: 2 });
    expect(await counts()).toEqual(before);

    worker = await startWorker({ dataSource: t.ds, databaseUrl: t.databaseUrl, pollingIntervalSeconds: 0.5 });
    const done = await resultOnceComputed(campaignId);
    expect(done.body.campaignId).toBe(campaignId);
    expect(done.body.computedBy).toBe('Ines Varga'); // the person whose upload asked for it, not the reader
    const [after] = await t.ds.query('SELECT state, result_id FROM result_request WHERE campaign_id = $1', [campaignId]);
    expect(after).toEqual({ state: 'done', result_id: done.body.id });
    const audit: { actor_label: string }[] = await t.ds.query("SELECT actor_label FROM audit_event WHERE action = 'result.computed' AND entity_id = $1", [campaignId]);
    expect(audit).toHaveLength(1);
    expect(audit[0].actor_label).toContain('Ines Varga');
  });

  it('a recompute is a POST (202, queued) that auditors may not make', async () => {
    const denied = await request(t.app).post(`/api/v1/campaigns/${campaignId}/result/recompute`).set(auth('petra'));
    expect(denied.status).toBe(403);
    const first = (await resultOnceComputed(campaignId)).body.id;
    // the coordinator sees (and recomputes) a campaign once it is submitted
    await t.ds.query("UPDATE campaign SET state = 'submitted' WHERE id = $1", [campaignId]);
    const res = await request(t.app).post(`/api/v1/campaigns/${campaignId}/result/recompute`).set(auth('ansel'));
    expect(res.status).toBe(202);
    expect(res.body).toMatchObject({ campaignId, state: 'queued', reason: 'recompute' });
    for (let i = 0; i < 240; i++) {
      const [r] = await t.ds.query('SELECT state FROM result_request WHERE campaign_id = $1', [campaignId]);
      if (r.state === 'done') break;
      await new Promise((ok) => setTimeout(ok, 250));
    }
    const again = await resultOnceComputed(campaignId);
    expect(again.body.id).not.toBe(first);
    expect(again.body.computedBy).toBe('Ansel Brandt');
  });
});
