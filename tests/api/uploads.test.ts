import crypto from 'node:crypto';
import Decimal from 'decimal.js';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';
import { insertUploadCampaign } from '../helpers/uploads-campaign';

// Ratio-series uploads through the real app and PostgreSQL: format detection, the one-transaction store,
// every kind of bad input (line and column named, nothing left behind), duplicates, access, plot data.
let t: TestApp;
let operator: string; // SCL lab staff (owning institute)
let otherLab: string; // HMO lab staff (clock B's institute: may read, may not upload)
let auditor: string;
let campaignId: string;

const mapping = { epochColumn: '1', epochKind: 'mjd', valueColumn: '2', valueKind: 'ratio', flagColumn: '3' };

function upload(csv: string | Buffer, fields: Record<string, string> = mapping, token = operator, id = campaignId, query = '') {
  const req = request(t.app).post(`/api/v1/campaigns/${id}/uploads${query}`).set('authorization', `Bearer ${token}`);
  for (const [k, v] of Object.entries(fields)) req.field(k, v);
  return req.attach('file', Buffer.isBuffer(csv) ? csv : Buffer.from(csv, 'utf8'), 'series.csv');
}

async function stored() {
  const [s] = await t.ds.query('SELECT count(*)::int AS n FROM ratio_series');
  const [r] = await t.ds.query('SELECT count(*)::int AS n FROM ratio_sample');
  const [lo] = await t.ds.query('SELECT count(DISTINCT series_id)::int AS n FROM ratio_series_file');
  return { series: s.n as number, samples: r.n as number, files: lo.n as number };
}

/** 1 s spacing from MJD 61100 (inside the 2026 campaign period). */
function goodCsv(n: number, opts: { start?: number; header?: boolean } = {}) {
  const lines = opts.header === false ? [] : ['mjd,ratio,flag'];
  for (let i = 0; i < n; i++) lines.push(`${((opts.start ?? 61100) + i / 86400).toFixed(10)},1.0000000000000001${String(i % 100).padStart(2, '0')},1`);
  return `${lines.join('\n')}\n`;
}

beforeAll(async () => {
  t = await createTestApp();
  operator = await tokenFor(t, 'ines.varga@saltmarsh-lab.invalid');
  otherLab = await tokenFor(t, 'mira.ostrowe@highridge-obs.invalid');
  auditor = await tokenFor(t, 'petra.lind@audit-bureau.invalid');
  campaignId = await insertUploadCampaign(t.ds);
});
afterAll(() => t.close());

describe('preview', () => {
  it('detects semicolons, a header after comments, CRLF and a BOM, and suggests the columns', async () => {
    const before = await stored();
    const csv = '\uFEFF# clock comparison, invented\r\n# second comment\r\ntime_utc;flag;ratio\r\n2026-03-01T00:00:00Z;valid;1.000000000000000012\r\n2026-03-01T00:00:01Z;invalid;1.000000000000000013\r\n';
    const res = await request(t.app).post(`/api/v1/campaigns/${campaignId}/uploads/preview`).set('authorization', `Bearer ${operator}`)
      .attach('file', Buffer.from(csv), 'lab.csv');
    expect(res.status).toBe(200);
    expect(res.body).toMatchObject({
      fileName: 'lab.csv', delimiter: ';', hasHeader: true, header: ['time_utc', 'flag', 'ratio'], columnCount: 3,
      suggested: { epochColumn: 1, epochKind: 'iso', valueColumn: 3, valueKind: 'ratio', flagColumn: 2 },
    });
    expect(res.body.rows[0]).toEqual({ line: 4, cells: ['2026-03-01T00:00:00Z', 'valid', '1.000000000000000012'] });
    expect(await stored()).toEqual(before);
  });

  it('reads no more than the first 64 KiB and says so', async () => {
    const res = await request(t.app).post(`/api/v1/campaigns/${campaignId}/uploads/preview`).set('authorization', `Bearer ${operator}`)
      .attach('file', Buffer.from(goodCsv(5000)), 'big.csv');
    expect(res.status).toBe(200);
    expect(res.body.bytesRead).toBe(64 * 1024);
    expect(res.body.rows).toHaveLength(20);
    expect(res.body.suggested).toMatchObject({ epochKind: 'mjd', valueKind: 'ratio', flagColumn: 3 });
  });
});

describe('upload', () => {
  it('stores rows, the raw file (SHA-256) and an audit event in one go; a 21-digit ratio keeps its last digit', async () => {
    const ratio21 = '1.00000000000000001234'; // 21 significant digits
    const csv = `# invented test series\nmjd,ratio,flag\n61100.0,${ratio21},1\n61100.5,1.000000000000000000,0\n61101.0,0.99999999999999998766,valid\n`;
    const before = await stored();
    const res = await upload(csv, mapping, operator, campaignId, `?uploadId=${crypto.randomUUID()}`);
    expect(res.status).toBe(201);
    const sha = crypto.createHash('sha256').update(csv).digest('hex');
    expect(res.body).toMatchObject({ campaignId, fileName: 'series.csv', sha256: sha, byteSize: Buffer.byteLength(csv), rowCount: 3, validCount: 2, firstMjd: 61100, lastMjd: 61101, tau0Seconds: 43200 });
    // uptime: 2 valid samples × 43 200 s over a span of 86 400 s + τ0 (common practice)
    expect(res.body.uptimeFraction).toBeCloseTo((2 * 43200) / (86400 + 43200), 12);
    const rows: { mjd: number; y: number; valid: boolean }[] = await t.ds.query('SELECT mjd, y, valid FROM ratio_sample WHERE series_id = $1 ORDER BY mjd', [res.body.id]);
    // Reference: decimal.js (general arbitrary-precision library) computes R − 1 exactly; Number() rounds once.
    expect(rows.map((r) => r.y)).toEqual([new Decimal(ratio21).minus(1).toNumber(), 0, new Decimal('0.99999999999999998766').minus(1).toNumber()]);
    expect(rows[0].y).toBe(1.234e-17);
    expect(rows.map((r) => r.valid)).toEqual([true, false, true]);
    const [{ raw }] = await t.ds.query('SELECT string_agg(bytes, \'\' ORDER BY part) AS raw FROM ratio_series_file WHERE series_id = $1', [res.body.id]);
    expect(Buffer.from(raw).toString('utf8')).toBe(csv);
    const audit = await t.ds.query("SELECT details FROM audit_event WHERE action = 'campaign.series-uploaded' AND entity_id = $1", [res.body.id]);
    expect(audit[0].details).toMatchObject({ campaignId, sha256: sha, rows: 3 });
    expect(await stored()).toEqual({ series: before.series + 1, samples: before.samples + 3, files: before.files + 1 });
  });

  it('reads tab-separated ISO epochs and fractional offsets without a header', async () => {
    const csv = '2026-04-01T00:00:00Z\t1.5e-16\n2026-04-01T00:00:10.5Z\t-2.25e-16\n';
    const res = await upload(csv, { epochColumn: '1', epochKind: 'iso', valueColumn: '2', valueKind: 'offset' });
    expect(res.status).toBe(201);
    // 2026-04-01 is MJD 61131 (MJD 40587 = 1970-01-01, common practice)
    const rows: { mjd: number; y: number }[] = await t.ds.query('SELECT mjd, y FROM ratio_sample WHERE series_id = $1 ORDER BY mjd', [res.body.id]);
    expect(rows[0]).toEqual({ mjd: 61131, y: 1.5e-16 });
    // MJD 61131 as float64 resolves about 7e-12 d (0.6 µs)
    expect(rows[1].mjd).toBeCloseTo(61131 + 10.5 / 86400, 10);
    expect(res.body.tau0Seconds).toBeCloseTo(10.5, 5);
  });

  it('reads quoted cells (through csv-parse) and refuses a quote left open', async () => {
    const ok = await upload('"mjd";"ratio"\n"61102.0";"1.000000000000000001"\n61102.5;1.0\n', { epochColumn: '1', epochKind: 'mjd', valueColumn: '2', valueKind: 'ratio' });
    expect(ok.status).toBe(201);
    expect(ok.body).toMatchObject({ rowCount: 2, mapping: { delimiter: ';', hasHeader: true, header: ['mjd', 'ratio'] } });
    const open = await upload('61103.0,"1.0\n61103.5,1.0"\n', { epochColumn: '1', epochKind: 'mjd', valueColumn: '2', valueKind: 'ratio' });
    expect(open.status).toBe(400);
    expect(open.body.issues[0]).toMatchObject({ line: 1, column: '2', message: expect.stringMatching(/quoted cell is malformed/) });
  });

  it('answers the same file again with 409 and a pointer to the earlier upload', async () => {
    const csv = goodCsv(10, { start: 61200 });
    const first = await upload(csv);
    expect(first.status).toBe(201);
    const before = await stored();
    const again = await upload(csv);
    expect(again.status).toBe(409);
    expect(again.headers['content-type']).toContain('application/problem+json');
    expect(again.body).toMatchObject({ existingUploadId: first.body.id, existingUpload: `/api/v1/uploads/${first.body.id}` });
    expect(await stored()).toEqual(before);
  });

  it('reports progress for a client-chosen upload id to the uploader only', async () => {
    const uploadId = crypto.randomUUID();
    const res = await upload(goodCsv(500, { start: 61250 }), mapping, operator, campaignId, `?uploadId=${uploadId}`);
    expect(res.status).toBe(201);
    const p = await request(t.app).get(`/api/v1/uploads/${uploadId}/progress`).set('authorization', `Bearer ${operator}`);
    expect(p.body).toMatchObject({ phase: 'done', rowsProcessed: 500, seriesId: res.body.id });
    expect(p.body.bytesRead).toBeGreaterThan(0);
    const other = await request(t.app).get(`/api/v1/uploads/${uploadId}/progress`).set('authorization', `Bearer ${otherLab}`);
    expect(other.status).toBe(404);
  });
});

describe('access', () => {
  it('refuses lab staff of the other institute (403) and campaigns that are no longer drafts (409)', async () => {
    const before = await stored();
    expect((await upload(goodCsv(3, { start: 61300 }), mapping, otherLab)).status).toBe(403);
    const submitted = await insertUploadCampaign(t.ds, { state: 'submitted' });
    const res = await upload(goodCsv(3, { start: 61300 }), mapping, operator, submitted);
    expect(res.status).toBe(409);
    expect(res.body.state).toBe('submitted');
    const returned = await insertUploadCampaign(t.ds, { state: 'returned' });
    expect((await upload(goodCsv(3, { start: 61300 }), mapping, operator, returned)).status).toBe(201);
    expect((await stored()).series).toBe(before.series + 1);
  });

  it('lets clock B’s lab read the list, auditors once the campaign is accepted, but not other labs', async () => {
    const list = await request(t.app).get(`/api/v1/campaigns/${campaignId}/uploads`).set('authorization', `Bearer ${otherLab}`);
    expect(list.status).toBe(200);
    expect(list.body.items.length).toBeGreaterThan(0);
    expect(list.body.total).toBe(list.body.items.length);
    // a draft is the lab's own work: auditors see accepted and certified campaigns only (docs/decisions/0004)
    expect((await request(t.app).get(`/api/v1/campaigns/${campaignId}/uploads`).set('authorization', `Bearer ${auditor}`)).status).toBe(404);
    const foreign = await insertUploadCampaign(t.ds, { instituteCode: 'HMO', otherInstituteCode: 'HMO' });
    expect((await request(t.app).get(`/api/v1/campaigns/${foreign}/uploads`).set('authorization', `Bearer ${operator}`)).status).toBe(404);
  });
});

describe('bad input: a clear error, nothing stored', () => {
  const cases: { name: string; csv: string | Buffer; line: number; column?: string; message: RegExp; fields?: Record<string, string> }[] = [
    { name: 'missing column', csv: 'mjd,ratio,flag\n61100.0,1.0,1\n61100.1,1.0\n', line: 3, column: '3', message: /2 column\(s\); the chosen mapping needs column 3/ },
    { name: 'wrong columns (mapping points past the end)', csv: '61100.0,1.0\n61100.1,1.0\n', line: 1, column: '3', message: /needs column 3/ },
    { name: 'non-numeric value', csv: 'mjd,ratio,flag\n61100.0,1.0,1\n61100.1,1.0,1\n61100.2,one,1\n', line: 4, column: '2', message: /ratio 'one' is not a decimal number/ },
    { name: 'more than 21 significant digits', csv: 'mjd,ratio,flag\n61100.0,1.000000000000000000012,1\n', line: 2, column: '2', message: /22 significant digits; at most 21/ },
    { name: 'NaN', csv: '61100.0\tNaN\n', line: 1, column: '2', message: /NaN and Infinity are refused/, fields: { epochColumn: '1', epochKind: 'mjd', valueColumn: '2', valueKind: 'offset' } },
    { name: 'Infinity', csv: '61100.0,1e-16\n61100.1,-Infinity\n', line: 2, column: '2', message: /not a finite number/, fields: { epochColumn: '1', epochKind: 'mjd', valueColumn: '2', valueKind: 'offset' } },
    { name: 'epochs going back', csv: 'mjd,ratio,flag\n61100.0,1.0,1\n61100.2,1.0,1\n61100.1,1.0,1\n', line: 4, column: '1', message: /earlier than the epoch of line 3/ },
    { name: 'duplicated epoch', csv: 'mjd,ratio,flag\n61100.0,1.0,1\n61100.0,1.0,1\n', line: 3, column: '1', message: /repeats the epoch of line 2/ },
    { name: 'epoch outside the campaign period', csv: 'mjd,ratio,flag\n61100.0,1.0,1\n61500.0,1.0,1\n', line: 3, column: '1', message: /outside the campaign period/ },
    { name: 'empty file', csv: '', line: 1, message: /the file is empty/ },
    { name: 'only comments and a header', csv: '# nothing\nmjd,ratio,flag\n', line: 2, message: /no data rows/ },
    { name: 'binary file (NUL bytes)', csv: Buffer.from([0x36, 0x31, 0x31, 0x30, 0x30, 0x2c, 0x31, 0x0a, 0x00, 0x01, 0x02, 0xff]), line: 2, column: '1', message: /NUL bytes/ },
    { name: 'invalid UTF-8', csv: Buffer.concat([Buffer.from('mjd,ratio,flag\n61100.0,1.0,1\n61100.1,1.0,'), Buffer.from([0xc3, 0x28]), Buffer.from('\n')]), line: 3, column: '3', message: /not valid UTF-8/ },
  ];
  it.each(cases)('$name → 400 naming line $line', async ({ csv, line, column, message, fields }) => {
    const before = await stored();
    const res = await upload(csv, fields ?? mapping);
    expect(res.status).toBe(400);
    expect(res.headers['content-type']).toContain('application/problem+json');
    expect(res.body.issues[0]).toMatchObject({ path: 'file', line });
    if (column) expect(res.body.issues[0].column).toBe(column);
    expect(res.body.issues[0].message).toMatch(message);
    expect(res.body.detail).toMatch(new RegExp(`line ${line}`));
    expect(await stored()).toEqual(before);
  });

  it('counts further problems after the first and says the whole file was checked', async () => {
    const res = await upload('mjd,ratio,flag\n61100.0,x,1\n61100.1,y,1\n61100.2,1.0,maybe\n61100.3,1.0,1\n');
    expect(res.status).toBe(400);
    expect(res.body.issues.map((i: { line: number }) => i.line)).toEqual([2, 3, 4]);
    // The detail, the list and furtherProblems tell one story: 3 problems, all 3 listed, none beyond the list.
    expect(res.body.detail).toMatch(/^The file was not stored: 3 problems in the whole file, all listed\. The first: line 2, column 2: /);
    expect(res.body.furtherProblems).toBe(0);
  });

  it('says how many problems are listed and how many are not when there are more than the list holds', async () => {
    const lines = Array.from({ length: 14 }, (_, i) => `61100.${i},x${i},1`);
    const res = await upload(`mjd,ratio,flag\n${lines.join('\n')}\n`);
    expect(res.status).toBe(400);
    expect(res.body.issues).toHaveLength(10);
    expect(res.body.furtherProblems).toBe(4);
    expect(res.body.detail).toMatch(/^The file was not stored: 14 problems in the whole file; the first 10 are listed, 4 more are not\. The first: line 2/);
  });

  it('refuses an invalid mapping with field paths', async () => {
    const res = await upload(goodCsv(3), { epochColumn: '1', epochKind: 'julian', valueColumn: '1', valueKind: 'ratio' });
    expect(res.status).toBe(400);
    expect(res.body.issues.map((i: { path: string }) => i.path)).toEqual(expect.arrayContaining(['body.epochKind']));
  });
});

describe('size limit', () => {
  it('answers a file over the configured limit with 413 and stores nothing', async () => {
    const small = await createTestApp({ env: { UPLOAD_LIMIT_BYTES: '2000' } });
    try {
      const token = await tokenFor(small, 'ines.varga@saltmarsh-lab.invalid');
      const id = await insertUploadCampaign(small.ds);
      const count = async () => (await small.ds.query('SELECT (SELECT count(*)::int FROM ratio_sample) AS n, (SELECT count(*)::int FROM ratio_series_file) AS f'))[0];
      const before = await count();
      const res = await request(small.app).post(`/api/v1/campaigns/${id}/uploads`).set('authorization', `Bearer ${token}`)
        .field(mapping).attach('file', Buffer.from(goodCsv(100)), 'big.csv');
      expect(res.status).toBe(413);
      expect(res.body).toMatchObject({ code: 'payload-too-large', limitBytes: 2000 });
      expect(await count()).toEqual(before);
      // just under the declared-size check: busboy's per-file limit answers instead
      const mid = await request(small.app).post(`/api/v1/campaigns/${id}/uploads`).set('authorization', `Bearer ${token}`)
        .field(mapping).attach('file', Buffer.from(goodCsv(60)), 'mid.csv');
      expect(mid.status).toBe(413);
      expect(await count()).toEqual(before);
    } finally {
      await small.close();
    }
  });
});

describe('plot data', () => {
  it('keeps a spike through min/max decimation and shows a gap as nulls', async () => {
    const lines = ['mjd,y,flag'];
    // 3000 samples at 10 s, a one-sample spike, and a gap of 1000 samples in the middle
    for (let i = 0; i < 3000; i++) {
      if (i >= 1000 && i < 2000) continue;
      const y = i === 500 ? 5e-15 : 1e-16 * Math.sin(i / 50);
      lines.push(`${(61300 + (i * 10) / 86400).toFixed(10)},${y},${i === 2500 ? 0 : 1}`);
    }
    const res = await upload(`${lines.join('\n')}\n`, { epochColumn: '1', epochKind: 'mjd', valueColumn: '2', valueKind: 'offset', flagColumn: '3' });
    expect(res.status).toBe(201);
    const plot = await request(t.app).get(`/api/v1/uploads/${res.body.id}/series?points=100`).set('authorization', `Bearer ${operator}`);
    expect(plot.status).toBe(200);
    expect(plot.body.buckets).toHaveLength(100);
    expect(Math.max(...plot.body.buckets.map((b: { max: number | null }) => b.max ?? -1))).toBe(5e-15);
    const gap = plot.body.buckets.filter((b: { min: number | null }) => b.min === null);
    // the gap covers a third of the span: about 33 of 100 buckets are empty
    expect(gap.length).toBeGreaterThanOrEqual(32);
    expect(gap.length).toBeLessThanOrEqual(34);
    expect(plot.body.buckets.reduce((a: number, b: { count: number }) => a + b.count, 0)).toBe(1999);
  });
});
