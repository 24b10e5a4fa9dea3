import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';

// Small defects found by a security test: external grid files in PROJ strings, control characters in names,
// CR-only line ends and exponent underflow in uploads. Each answers 400 naming the field (or line and column).
let t: TestApp;
const tok: Record<string, string> = {};
const as = (who: string) => ({
  post: (url: string, body: object) => request(t.app).post(url).set('authorization', `Bearer ${tok[who]}`).send(body),
  patch: (url: string, body: object) => request(t.app).patch(url).set('authorization', `Bearer ${tok[who]}`).send(body),
});
const paths = (res: request.Response) => (res.body.issues ?? []).map((i: { path: string }) => i.path);
const site = { referencePoint: 'Top of the reference mark', crs: 'EPSG:4979', coordinates: [9.1, 50.2, 120], quasigeoid: { source: 'entered', heightM: 40.0, uncertaintyM: 0.02 } };
let draftId: string;

beforeAll(async () => {
  t = await createTestApp();
  tok.ines = await tokenFor(t, 'ines.varga@saltmarsh-lab.invalid');
  tok.ansel = await tokenFor(t, 'ansel.brandt@geopotential-office.invalid');
  tok.yusra = await tokenFor(t, 'yusra.holm@geopotential-office.invalid');
  draftId = (await t.ds.query("SELECT id FROM campaign WHERE name = 'SCL–HMO Sr run January 2027'"))[0].id;
});
afterAll(() => t.close());

describe('PROJ strings naming external grid files', () => {
  it.each(['+proj=longlat +ellps=GRS80 +nadgrids=../../../../etc/passwd +no_defs', '+proj=longlat +ellps=GRS80 +nadgrids=@null', '+proj=longlat +ellps=GRS80 +geoidgrids=egm.gtx'])(
    'calc/transform refuses %s with 400 naming the field', async (crs) => {
      const res = await as('ines').post('/api/v1/calc/transform', { from: crs, to: 'EPSG:4978', coordinates: [9.1, 50.2, 120] });
      expect(res.status, res.text).toBe(400);
      expect(paths(res)).toContain('body.from');
      expect(res.body.detail).toMatch(/grid/);
    });

  it('a site with such a CRS is refused, naming body.crs, and nothing is stored', async () => {
    const before = (await t.ds.query('SELECT count(*)::int AS n FROM site'))[0].n;
    const res = await as('ines').post('/api/v1/sites', { ...site, name: 'Grid file site', crs: '+proj=longlat +ellps=GRS80 +nadgrids=../../x.gsb' });
    expect(res.status, res.text).toBe(400);
    expect(paths(res)).toContain('body.crs');
    expect((await t.ds.query('SELECT count(*)::int AS n FROM site'))[0].n).toBe(before);
  });
});

describe('control characters in names', () => {
  const bad = ['Saltmarsh\r\nSet-Cookie: x=1', 'two\nlines', 'tab\there', 'nul\u0000byte', 'line\u2028separator'];
  it.each(bad)('site, clock, campaign, datum, institute and token names refuse %j', async (name) => {
    expect(paths(await as('ines').post('/api/v1/sites', { ...site, name }))).toContain('body.name');
    expect(paths(await as('ines').patch(`/api/v1/campaigns/${draftId}`, { name }))).toContain('body.name');
    expect(paths(await as('ansel').post('/api/v1/network/datums', { name, tideSystem: 'mean-tide' }))).toContain('body.name');
    expect(paths(await as('yusra').post('/api/v1/institutes', { code: 'NEWLAB', name, kind: 'laboratory' }))).toContain('body.name');
    expect(paths(await as('ines').post('/api/v1/me/tokens', { name }))).toContain('body.name');
    const clock = (await t.ds.query("SELECT id FROM clock WHERE name = 'SCL-Sr1'"))[0].id;
    expect(paths(await as('ines').patch(`/api/v1/clocks/${clock}`, { name }))).toContain('body.name');
    expect((await t.ds.query('SELECT count(*)::int AS n FROM site WHERE name = $1', [name.trim().replaceAll('\u0000', '')]))[0].n).toBe(0); // PostgreSQL text holds no NUL
  });

  it('a plain name with inner spaces and accents still passes', async () => {
    const res = await as('ines').post('/api/v1/sites', { ...site, name: 'Pier hall Ø — east' });
    expect(res.status, res.text).toBe(201);
  });
});

describe('upload details', () => {
  const upload = (csv: string, fileName: string, fields: Record<string, string> = { epochColumn: '1', epochKind: 'mjd', valueColumn: '2', valueKind: 'offset', hasHeader: 'true' }) => {
    let r = request(t.app).post(`/api/v1/campaigns/${draftId}/uploads`).set('authorization', `Bearer ${tok.ines}`);
    for (const [k, v] of Object.entries(fields)) r = r.field(k, v);
    return r.attach('file', Buffer.from(csv), fileName);
  };

  it('accepts CR-only line ends (old Mac text files): every row stored, line numbers as in the file', async () => {
    const rows = Array.from({ length: 50 }, (_, i) => `${(61_420 + i / 8640).toFixed(9)},${(1e-16 * (i % 5)).toExponential(3)}`);
    const res = await upload(['mjd,y', ...rows].join('\r') + '\r', 'cr-only.csv');
    expect(res.status, res.text).toBe(201);
    expect(res.body.rowCount).toBe(50);
    const bad = await upload(['mjd,y', ...rows.slice(0, 3), '61420.5,oops'].join('\r') + '\r', 'cr-only-bad.csv');
    expect(bad.status).toBe(400);
    expect(bad.body.issues[0]).toMatchObject({ line: 5, column: '2' });
  });

  it('refuses a value that underflows to zero (1e-9999), naming line and column; nothing is stored', async () => {
    const before = (await t.ds.query('SELECT count(*)::int AS n FROM ratio_series'))[0].n;
    const res = await upload('mjd,y\n61421.0,1e-17\n61421.0001,1e-9999\n', 'underflow.csv');
    expect(res.status, res.text).toBe(400);
    expect(res.body.issues[0]).toMatchObject({ line: 3, column: '2' });
    expect(res.body.issues[0].message).toMatch(/underflow|too small/);
    expect((await t.ds.query('SELECT count(*)::int AS n FROM ratio_series'))[0].n).toBe(before);
    const zero = await upload('mjd,y\n61422.0,0\n61422.0001,0.0e-9999\n', 'zeros.csv');
    expect(zero.status, zero.text).toBe(201); // a written zero is a zero
  });
});
