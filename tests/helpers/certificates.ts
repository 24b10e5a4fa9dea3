import request from 'supertest';
import { expect } from 'vitest';
import type { CertificateRequestProgress } from '../../shared/jobs';
import type { TestApp } from './test-app';

// Certificates are issued by a job: the POST answers 202 with the request and a Location of its progress. These
// helpers start the app's in-process worker, send the request and poll the progress until it is finished.

const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));

/** Polls GET /api/v1/certificate-requests/:id/progress until done or failed; returns the last answer. */
export async function waitForCertificateRequest(t: TestApp, token: string, progressUrl: string, timeoutMs = 60_000): Promise<CertificateRequestProgress> {
  const until = Date.now() + timeoutMs;
  for (;;) {
    const res = await request(t.app).get(progressUrl).set('authorization', `Bearer ${token}`);
    expect(res.status, res.text).toBe(200);
    const p = res.body as CertificateRequestProgress;
    if (p.state === 'done' || p.state === 'failed') return p;
    if (Date.now() > until) throw new Error(`certificate request still ${p.state} (${p.stage}) after ${timeoutMs} ms`);
    await sleep(150);
  }
}

/** Polls GET /api/v1/campaigns/:id/result/progress until no computation is queued or running. */
export async function waitForResult(t: TestApp, token: string, campaignId: string, timeoutMs = 60_000) {
  const until = Date.now() + timeoutMs;
  for (;;) {
    const res = await request(t.app).get(`/api/v1/campaigns/${campaignId}/result/progress`).set('authorization', `Bearer ${token}`);
    expect(res.status, res.text).toBe(200);
    if (res.body.state !== 'queued' && res.body.state !== 'running') return res.body as { state: string; stage: string; fraction: number };
    if (Date.now() > until) throw new Error(`result still ${res.body.state} after ${timeoutMs} ms`);
    await sleep(150);
  }
}

/**
 * POSTs an issue (`/api/v1/campaigns/:id/certificates`) or reissue (`/api/v1/certificates/:n/reissue`) and, when
 * accepted (202), waits for the worker. `res` is the POST's answer (checks made at request time answer 4xx there);
 * `progress` the finished request, `number` the certificate's number when it is done.
 */
export async function requestCertificate(t: TestApp, token: string, path: string, body: Record<string, unknown>) {
  await t.startJobs();
  // The request is checked against the stored result: let the worker finish the campaign's result first.
  const campaign = /^\/api\/v1\/campaigns\/([^/]+)\/certificates$/.exec(path)?.[1];
  if (campaign) await waitForResult(t, token, campaign);
  const res = await request(t.app).post(path).set('authorization', `Bearer ${token}`).send(body);
  if (res.status !== 202) return { res, progress: null, number: null };
  expect(res.headers.location).toBe(res.body.progressUrl);
  const progress = await waitForCertificateRequest(t, token, res.headers.location as string);
  return { res, progress, number: progress.certificateNumber };
}

/** As requestCertificate, and insists it ended with a certificate; returns its summary (GET /api/v1/certificates/:n). */
export async function issuedCertificate(t: TestApp, token: string, path: string, body: Record<string, unknown>) {
  const out = await requestCertificate(t, token, path, body);
  expect(out.res.status, out.res.text).toBe(202);
  expect(out.progress, JSON.stringify(out.progress)).toMatchObject({ state: 'done', fraction: 1 });
  const cert = await request(t.app).get(`/api/v1/certificates/${out.number}`).set('authorization', `Bearer ${token}`);
  expect(cert.status, cert.text).toBe(200);
  return { ...out, certificate: cert.body as { number: string; id: string; state: string; pdfSha256: string; revision: number } };
}
