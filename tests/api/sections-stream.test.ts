import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';

// The levelling-section CSV is read as a stream with limits: file size (413), line length (400 naming the line) and
// the number of sections; nothing is stored when a limit is hit.
let t: TestApp;
let coordinator: string;
beforeAll(async () => {
  t = await createTestApp({ env: { SECTIONS_UPLOAD_LIMIT_BYTES: String(2 * 1024 * 1024), UPLOAD_MAX_LINE_BYTES: '4096' } });
  coordinator = await tokenFor(t, 'ansel.brandt@geopotential-office.invalid');
});
afterAll(() => t.close());

const upload = (csv: string | Buffer, preview = false) =>
  request(t.app).post(`/api/v1/network/sections/upload?preview=${preview}`).set('authorization', `Bearer ${coordinator}`).attach('file', Buffer.from(csv), 'sections.csv');
const sections = async () => ((await t.ds.query('SELECT count(*)::int AS n FROM levelling_section')) as { n: number }[])[0].n;
const HEADER = 'line,from,to,delta_h_m,length_km\n';

describe('levelling-section CSV limits', () => {
  it('a file over the section-upload size limit → 413, nothing stored', async () => {
    const before = await sections();
    let csv = HEADER;
    while (csv.length < 3 * 1024 * 1024) csv += 'Long line,CD-01,CD-05,1.234,3.1\n';
    const res = await upload(csv);
    expect(res.status).toBe(413);
    expect(res.body).toMatchObject({ code: 'payload-too-large', limitBytes: 2 * 1024 * 1024 });
    expect(await sections()).toBe(before);
  });

  it('an overlong line → 400 naming the line and the limit', async () => {
    const res = await upload(`${HEADER}T,CD-01,CD-05,1.234,3.1\nT,CD-05,CD-09,${'9'.repeat(5000)},3.3\n`);
    expect(res.status).toBe(400);
    expect(res.body.issues[0]).toMatchObject({ line: 3, column: 'line' });
    expect(res.body.issues[0].message).toMatch(/longer than 4096 characters/);
  });

  it('more than 100 000 sections → 400 naming the first line beyond, nothing stored', async () => {
    const before = await sections();
    const row = 'T,CD-01,CD-05,1.2,3\n';
    const res = await upload(HEADER + row.repeat(100_001));
    expect(res.status).toBe(400);
    expect(res.body.issues[0]).toMatchObject({ line: 100_002 });
    expect(res.body.issues[0].message).toMatch(/more than 100000 sections/);
    expect(await sections()).toBe(before);
  });

  it('a good file still previews and names its rows; bad CSV still names its line', async () => {
    const pre = await upload(`# comment\n${HEADER}T,CD-01,CD-05,1.234,3.1\n`, true);
    expect(pre.status).toBe(200);
    expect(pre.body).toMatchObject({ stored: false, rowCount: 1 });
    expect(pre.body.rows[0]).toMatchObject({ line: 3, fromCode: 'CD-01', toCode: 'CD-05', deltaHeightM: 1.234 });
    const ragged = await upload(`${HEADER}T,CD-01,CD-05,1.234,3.1\nT,CD-05,CD-09,2\n`);
    expect(ragged.status).toBe(400);
    expect(ragged.body.issues[0]).toMatchObject({ line: 3 });
  });
});
