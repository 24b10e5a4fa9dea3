import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';
import { insertUploadCampaign } from '../helpers/uploads-campaign';

// Line splitting of uploads: a file without line ends, or with one overlong line, is refused with a 400 naming the
// line and the limit (64 KiB by default), after linear work; nothing is stored. Lines at the limit still pass.
let t: TestApp;
let operator: string;
let campaignId: string;
const mapping = { epochColumn: '1', epochKind: 'mjd', valueColumn: '2', valueKind: 'offset' };
const LIMIT = 64 * 1024;

function upload(csv: Buffer) {
  const req = request(t.app).post(`/api/v1/campaigns/${campaignId}/uploads`).set('authorization', `Bearer ${operator}`);
  for (const [k, v] of Object.entries(mapping)) req.field(k, v);
  return req.attach('file', csv, 'series.csv');
}
async function stored() {
  const [r] = await t.ds.query('SELECT (SELECT count(*)::int FROM ratio_series) AS series, (SELECT count(*)::int FROM ratio_sample) AS samples');
  return r as { series: number; samples: number };
}

beforeAll(async () => {
  t = await createTestApp({ seed: false });
  operator = await tokenFor(t, 'ines.varga@saltmarsh-lab.invalid');
  campaignId = await insertUploadCampaign(t.ds);
});
afterAll(() => t.close());

describe('line-length limit', () => {
  it('a 16 MB file without any line end → 400 naming line 1 and the limit; nothing stored', async () => {
    const before = await stored();
    const res = await upload(Buffer.alloc(16 * 1024 * 1024, '7'));
    expect(res.status).toBe(400);
    expect(res.headers['content-type']).toContain('application/problem+json');
    expect(res.body.issues[0]).toMatchObject({ path: 'file', line: 1 });
    expect(res.body.issues[0].message).toMatch(/line 1 is longer than 65536 characters/);
    expect(res.body.detail).toMatch(/line 1/);
    expect(await stored()).toEqual(before);
  });

  it('an overlong third line between good lines → 400 naming line 3', async () => {
    const csv = `61100.0,1.5e-17\n61100.1,1.6e-17\n61100.2,${'1'.repeat(LIMIT)}\n61100.3,1.4e-17\n`;
    const res = await upload(Buffer.from(csv));
    expect(res.status).toBe(400);
    expect(res.body.issues[0]).toMatchObject({ path: 'file', line: 3 });
    expect(res.body.issues[0].message).toMatch(/line 3 is longer than 65536 characters/);
  });

  it('an overlong line split across many chunks after 200 000 short lines is still named by its number', async () => {
    let csv = '';
    for (let i = 0; i < 200_000; i++) csv += `${(61100 + i / 86400).toFixed(9)},1.5e-17\n`;
    csv += `61103,${'2'.repeat(3 * LIMIT)}`;
    const res = await upload(Buffer.from(csv));
    expect(res.status).toBe(400);
    expect(res.body.issues[0]).toMatchObject({ path: 'file', line: 200_001 });
    expect(res.body.issues[0].message).toMatch(/line 200001 is longer than 65536 characters/);
  });

  it('a line just under the limit is read as usual: its 65 516-digit cell is refused as no number (a linear check, no regex backtracking)', async () => {
    const csv = `61100.0,1.5e-17\n61100.1,${'3'.repeat(LIMIT - 20)}x\n`;
    const res = await upload(Buffer.from(csv));
    expect(res.status).toBe(400);
    expect(res.body.issues[0]).toMatchObject({ line: 2, column: '2' });
    expect(res.body.issues[0].message).not.toMatch(/longer than/);
  });
});
