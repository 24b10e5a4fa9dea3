import { createHash } from 'node:crypto';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';

// Public verification tells a stranger about a registered certificate only when the file they hold proves it:
// its signature verifies against the institute certificate and its SHA-256 is registered. A file that merely names
// a number, or a number with a wrong SHA-256, learns nothing about the record. The endpoint is rate-limited per
// address with counters in PostgreSQL (shared by every process).
let t: TestApp;
let number: string;
let pdf: Buffer;
let recordSha: string;
const sha256 = (b: Buffer) => createHash('sha256').update(b).digest('hex');

const verifyFile = (file: Buffer) => request(t.app).post('/api/v1/certificates/verify').attach('file', file, { filename: 'c.pdf', contentType: 'application/pdf' });
const verifyNumber = (n: string, digest: string) => request(t.app).get('/api/v1/certificates/verify').query({ number: n, sha256: digest });

beforeAll(async () => {
  t = await createTestApp({ env: { RATE_LIMITS: 'on' } });
  const [row] = await t.ds.query('SELECT number, pdf_sha256, campaign_label FROM certificate ORDER BY number LIMIT 1');
  number = row.number;
  recordSha = row.pdf_sha256;
  const auditor = await tokenFor(t, 'petra.lind@audit-bureau.invalid');
  const res = await request(t.app).get(`/api/v1/certificates/${number}/pdf`).set('authorization', `Bearer ${auditor}`).buffer(true)
    .parse((r, cb) => { const c: Buffer[] = []; r.on('data', (d: Buffer) => c.push(d)); r.on('end', () => cb(null, Buffer.concat(c))); });
  pdf = res.body as Buffer;
  expect(sha256(pdf)).toBe(recordSha);
});
afterAll(() => t.close());

function expectNothingDisclosed(body: Record<string, unknown>) {
  expect(body.certificate).toBeNull();
  const text = JSON.stringify(body);
  expect(text).not.toContain(recordSha);
}

describe('what public verification discloses', () => {
  it('an unsigned 100-byte file naming a certificate number learns nothing about the record', async () => {
    const forged = Buffer.from(`%PDF-1.7\n1 0 obj << /CertificateNumber (${number}) >> endobj\n%%EOF\n`.padEnd(100, ' '), 'latin1');
    expect(forged.length).toBe(100);
    const res = await verifyFile(forged);
    expect(res.status).toBe(200);
    expect(res.body.verdict).toBe('unsigned');
    expectNothingDisclosed(res.body);
  });

  it('a genuine file with one byte changed is reported tampered, without the record', async () => {
    const copy = Buffer.from(pdf);
    copy[400] ^= 0x01;
    const res = await verifyFile(copy);
    expect(res.body.verdict).toBe('tampered');
    expectNothingDisclosed(res.body);
  });

  it('bytes put in front of a signed file are called that, not "appended"', async () => {
    const res = await verifyFile(Buffer.concat([Buffer.from('%% inserted line\n', 'latin1'), pdf]));
    expect(res.body.verdict).toBe('tampered');
    expect(res.body.reason).not.toMatch(/appended/);
    expect(res.body.reason).toMatch(/before/);
    expectNothingDisclosed(res.body);
  });

  it('the untouched file gets the full record', async () => {
    const res = await verifyFile(pdf);
    expect(res.body.verdict).toBe('valid');
    expect(res.body.certificate).toMatchObject({ number, pdfSha256: recordSha });
  });

  it('by number and SHA-256: valid or unknown only, and the same answer for a wrong digest as for an unknown number', async () => {
    const good = await verifyNumber(number, recordSha);
    expect(good.body.verdict).toBe('valid');
    expect(good.body.certificate).toBeNull();
    const wrong = await verifyNumber(number, 'f'.repeat(64));
    const unknown = await verifyNumber('CL-1999-99999-r1', 'f'.repeat(64));
    expect(wrong.body.verdict).toBe('not-issued-here');
    expect(unknown.body.verdict).toBe('not-issued-here');
    expect(wrong.body.reason).toBe(unknown.body.reason.replace('CL-1999-99999-r1', number));
    expectNothingDisclosed(wrong.body);
  });

  it('refuses a caller past the limit with 429, Retry-After and a problem document; counters are in PostgreSQL', async () => {
    let refused: request.Response | undefined;
    for (let i = 0; i < 40 && !refused; i++) {
      const res = await verifyNumber('CL-1999-99999-r1', '0'.repeat(64));
      if (res.status === 429) refused = res;
      else expect(res.status).toBe(200);
    }
    expect(refused, 'no 429 within 40 requests').toBeDefined();
    expect(refused!.headers['content-type']).toContain('application/problem+json');
    expect(refused!.body.code).toBe('too-many-requests');
    expect(Number(refused!.headers['retry-after'])).toBeGreaterThan(0);
    const upload = await verifyFile(pdf);
    expect(upload.status).toBe(429);
    const rows: { key: string; points: number }[] = await t.ds.query("SELECT key, points FROM rate_limit WHERE key LIKE 'verify:%'");
    expect(rows).toHaveLength(1);
    expect(rows[0].points).toBeGreaterThan(30);
  });
});
