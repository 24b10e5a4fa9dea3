import DecimalBase from 'decimal.js';
import { parse } from 'csv-parse/sync';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';
import { insertUploadCampaign } from '../helpers/uploads-campaign';

// Exact round trip: the samples export of an upload gives back every ratio digit for digit as uploaded (18–21
// significant digits, signs, exponents, quotes, leading dots, trailing zeros) and y exactly as stored, bit for bit.
const Decimal = DecimalBase.clone({ precision: 50 });
let t: TestApp;
let operator: string;
let otherLab: string;
let auditor: string;

const RATIOS = [
  '1.00000000000000012', // 18 significant digits
  '1.000000000000000001', // 19
  '1.0000000000000000012', // 20
  '1.00000000000000000123', // 21
  '0.999999999999999999999', // 21 nines below the reference
  '1.00000000000000000000', // equal to the reference: y = 0, trailing zeros kept
  '+1.00000000000000000456', // explicit sign
  '1.00000000000000000789e0', // exponent
  '100000000000000000012e-20', // integer mantissa with a negative exponent (21 digits)
  '.999999999999999999876', // leading dot
  '1.00000000000000000321', // quoted in the file
  '0.999999999999999000001',
  '1.00000000000001234567',
];

function csv(): string {
  const lines = ['# invented comparison, exact round trip', 'time_mjd;ratio;flag'];
  RATIOS.forEach((r, i) => {
    const cell = r === '1.00000000000000000321' ? `"${r}"` : r;
    lines.push(`${(61100 + i / 86400).toFixed(9)};${cell};${i % 5 === 4 ? 'invalid' : 'valid'}`);
  });
  return `${lines.join('\r\n')}\r\n`;
}

beforeAll(async () => {
  t = await createTestApp();
  operator = await tokenFor(t, 'ines.varga@saltmarsh-lab.invalid');
  otherLab = await tokenFor(t, 'mira.ostrowe@highridge-obs.invalid'); // clock B's institute: may read
  auditor = await tokenFor(t, 'petra.lind@audit-bureau.invalid');
});
afterAll(() => t.close());

async function uploadTo(campaignId: string) {
  const res = await request(t.app).post(`/api/v1/campaigns/${campaignId}/uploads`).set('authorization', `Bearer ${operator}`)
    .field('epochColumn', '1').field('epochKind', 'mjd').field('valueColumn', '2').field('valueKind', 'ratio').field('flagColumn', '3')
    .attach('file', Buffer.from(csv()), 'exact.csv');
  if (res.status !== 201) throw new Error(JSON.stringify(res.body));
  return res.body.id as string;
}

function exported(text: string) {
  const body = text.split('\n').filter((l) => !l.startsWith('#')).join('\n');
  return parse(body, { columns: true }) as { line: string; epoch: string; ratio: string; mjd: string; y: string; valid: string }[];
}

describe('samples export', () => {
  it.each([['1'], ['1.000000000000000000500']])('gives back every ratio digit for digit and y bit for bit (reference ratio %s)', async (referenceRatio) => {
    const campaignId = await insertUploadCampaign(t.ds, { referenceRatio });
    const id = await uploadTo(campaignId);
    const res = await request(t.app).get(`/api/v1/uploads/${id}/samples.csv`).set('authorization', `Bearer ${operator}`);
    expect(res.status).toBe(200);
    expect(res.headers['content-type']).toContain('text/csv');
    expect(res.text).not.toContain('INCOMPLETE');
    const rows = exported(res.text);
    expect(rows.map((r) => r.ratio)).toEqual(RATIOS);
    expect(rows.map((r) => Number(r.line))).toEqual(RATIOS.map((_, i) => i + 3));
    expect(rows.map((r) => r.valid)).toEqual(RATIOS.map((_, i) => (i % 5 === 4 ? '0' : '1')));
    // y and mjd as stored: PostgreSQL's float8 text (shortest exact since PostgreSQL 12) against the export, bit for bit
    const stored = (await t.ds.query('SELECT mjd::text AS mjd, y::text AS y FROM ratio_sample WHERE series_id = $1 ORDER BY mjd', [id])) as { mjd: string; y: string }[];
    expect(stored).toHaveLength(RATIOS.length);
    const bits = (v: number) => Buffer.from(new Float64Array([v]).buffer).toString('hex');
    rows.forEach((r, i) => {
      expect(bits(Number(r.y))).toBe(bits(Number(stored[i].y)));
      expect(bits(Number(r.mjd))).toBe(bits(Number(stored[i].mjd)));
      // and y is R/R0 − 1 of the exported ratio: within one rounding of the 50-digit decimal value (decimal.js)
      const exact = new Decimal(r.ratio).div(referenceRatio).minus(1);
      const y = Number(r.y);
      expect(Math.abs(new Decimal(y).minus(exact).toNumber())).toBeLessThanOrEqual(Math.abs(exact.toNumber()) * 2 ** -52);
    });
    expect(Number(rows[5].y)).toBe(referenceRatio === '1' ? 0 : Number(new Decimal(1).div(referenceRatio).minus(1)));
  });

  it('follows the reading rule of the upload detail: clock B’s lab and auditors read, other labs get 404', async () => {
    const campaignId = await insertUploadCampaign(t.ds);
    const id = await uploadTo(campaignId);
    expect((await request(t.app).get(`/api/v1/uploads/${id}/samples.csv`).set('authorization', `Bearer ${otherLab}`)).status).toBe(200);
    expect((await request(t.app).get(`/api/v1/uploads/${id}/samples.csv`).set('authorization', `Bearer ${auditor}`)).status).toBe(200);
    // a campaign between SCL and the coordination office: HMO's lab staff have no part in it
    const notTheirs = await uploadTo(await insertUploadCampaign(t.ds, { otherInstituteCode: 'NGCO' }));
    const foreign = await request(t.app).get(`/api/v1/uploads/${notTheirs}/samples.csv`).set('authorization', `Bearer ${otherLab}`);
    expect(foreign.status).toBe(404);
    expect((await request(t.app).get(`/api/v1/uploads/${notTheirs}`).set('authorization', `Bearer ${otherLab}`)).status).toBe(404);
    expect((await request(t.app).get(`/api/v1/uploads/${id}/samples.csv`)).status).toBe(401);
  });
});
