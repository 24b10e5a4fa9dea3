import Decimal from 'decimal.js';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';

// Registry API: sites (coordinates in any CRS), quasigeoid grids, clocks with versioned budgets, reference
// frequencies and fibre links — checked by status, body and the rows in PostgreSQL.

let t: TestApp;
const tok: Record<string, string> = {};
const people = {
  scl: 'ines.varga@saltmarsh-lab.invalid',
  hmo: 'mira.ostrowe@highridge-obs.invalid',
  coord: 'ansel.brandt@geopotential-office.invalid',
  auditor: 'petra.lind@audit-bureau.invalid',
};
beforeAll(async () => {
  t = await createTestApp();
  for (const [k, email] of Object.entries(people)) tok[k] = await tokenFor(t, email);
});
afterAll(() => t.close());

const as = (who: keyof typeof people) => ({
  get: (url: string) => request(t.app).get(url).set('authorization', `Bearer ${tok[who]}`),
  post: (url: string, body: object) => request(t.app).post(url).set('authorization', `Bearer ${tok[who]}`).send(body),
  patch: (url: string, body: object) => request(t.app).patch(url).set('authorization', `Bearer ${tok[who]}`).send(body),
});
const paths = (res: request.Response) => (res.body.issues ?? []).map((i: { path: string }) => i.path);

const baseSite = {
  referencePoint: 'Top of the reference mark on the optical table',
  quasigeoid: { source: 'entered', heightM: 40.0, uncertaintyM: 0.02 },
  benchmarkTie: { benchmarkCode: 'TEST-BM1', heightDifferenceM: 1.5, uncertaintyM: 0.002 },
};

describe('sites', () => {
  it('converts UTM (EPSG:25832) input to GRS80 latitude/longitude — UTM zone 32N example at 52.3°N 7.4°E (an arbitrary point)', async () => {
    // Computed from the Krüger n⁴ series of EPSG Guidance Note 7-2 (IOGP 373-7-2) §3.5.3.1 with Python mpmath at 40 digits:
    // 52.3°N, 7.4°E → E 390 898.4597 m, N 5 795 611.3641 m (GRS80, ETRS89 / UTM 32N).
    // ETRS89/UTM uses GRS80, whose flattening differs from WGS 84 by 1.6e-11 relative: below 0.1 mm here.
    const res = await as('scl').post('/api/v1/sites', { ...baseSite, name: 'UTM test site', crs: 'EPSG:25832', coordinates: [390898.4597, 5795611.3641, 100], ellipsoidalHeightUncertaintyM: 0.01 });
    expect(res.status).toBe(201);
    expect(res.body.entered).toMatchObject({ crs: 'EPSG:25832', coordinates: [390898.4597, 5795611.3641, 100] });
    expect(res.body.grs80.latitudeDeg).toBeCloseTo(52.3, 8);
    expect(res.body.grs80.longitudeDeg).toBeCloseTo(7.4, 8);
    expect(res.body.grs80.ellipsoidalHeightM).toBeCloseTo(100, 6);
    expect(res.body.assumptions.join(' ')).toMatch(/coincident/);
    // H = h − ζ (Heiskanen & Moritz, Physical Geodesy, 1967, §8-13, normal heights and the quasigeoid; section from memory), u(H) = √(u_h² + u_ζ²) (GUM eq. 10, uncorrelated inputs)
    expect(res.body.normalHeight.valueM).toBeCloseTo(60, 6);
    expect(res.body.normalHeight.uncertaintyM).toBeCloseTo(Math.sqrt(0.01 ** 2 + 0.02 ** 2), 12);
    const [row] = await t.ds.query('SELECT crs, latitude_deg, longitude_deg, x_m, benchmark_code, quasigeoid_source FROM site WHERE id = $1', [res.body.id]);
    expect(row).toMatchObject({ crs: 'EPSG:25832', benchmark_code: 'TEST-BM1', quasigeoid_source: 'entered' });
    expect(row.latitude_deg).toBeCloseTo(52.3, 8);
  });

  it('stores geocentric X/Y/Z on GRS80 — GRS80 check (45°, 45°, 100 m), EPSG method 9602', async () => {
    // Computed from the EPSG method 9602 formulas (GN 7-2 §4.1.1) with GRS80 (Moritz 2000), Python mpmath: (45°, 45°, 100 m) → (3 194 469.1451, 3 194 469.1451, 4 487 419.1194) m. Geographic input is lon, lat, h.
    const res = await as('scl').post('/api/v1/sites', { ...baseSite, name: 'XYZ test site', crs: 'EPSG:4937', coordinates: [45, 45, 100] });
    expect(res.status).toBe(201);
    expect(res.body.grs80.xM).toBeCloseTo(3194469.1451, 3);
    expect(res.body.grs80.yM).toBeCloseTo(3194469.1451, 3);
    expect(res.body.grs80.zM).toBeCloseTo(4487419.1194, 3);
  });

  it('reports bad input with field paths and stores nothing', async () => {
    const before = await t.ds.query('SELECT count(*)::int AS n FROM site');
    const r1 = await as('scl').post('/api/v1/sites', { crs: 'EPSG:25832', coordinates: [1], quasigeoid: { source: 'entered', heightM: 'x' } });
    expect(r1.status).toBe(400);
    expect(paths(r1)).toEqual(expect.arrayContaining(['body.name', 'body.referencePoint', 'body.coordinates', 'body.quasigeoid.heightM']));
    const r2 = await as('scl').post('/api/v1/sites', { ...baseSite, name: 'Bad CRS', crs: 'EPSG:9999', coordinates: [1, 2] });
    expect(r2.status).toBe(400);
    expect(paths(r2)).toEqual(['body.crs']);
    const after = await t.ds.query('SELECT count(*)::int AS n FROM site');
    expect(after[0].n).toBe(before[0].n);
  });

  it('lets only the owning institute change a site; lists with paging, sorting and filtering', async () => {
    const hmoSite = (await t.ds.query("SELECT id FROM site WHERE name = 'HMO clock hall'"))[0].id;
    const denied = await as('scl').patch(`/api/v1/sites/${hmoSite}`, { name: 'Renamed by SCL' });
    expect(denied.status).toBe(403);
    expect((await t.ds.query('SELECT name FROM site WHERE id = $1', [hmoSite]))[0].name).toBe('HMO clock hall');
    const ok = await as('hmo').patch(`/api/v1/sites/${hmoSite}`, { referencePoint: 'Centre of the pier plate (re-surveyed)' });
    expect(ok.status).toBe(200);
    expect(ok.body.referencePoint).toBe('Centre of the pier plate (re-surveyed)');
    const audit = await t.ds.query("SELECT action FROM audit_event WHERE entity_type = 'site' AND entity_id = $1", [hmoSite]);
    expect(audit.map((a: { action: string }) => a.action)).toContain('site.updated');
    // an operator may not register a site for another institute
    const inst = (await t.ds.query("SELECT id FROM institute WHERE code = 'HMO'"))[0].id;
    expect((await as('scl').post('/api/v1/sites', { ...baseSite, name: 'Foreign', instituteId: inst, crs: 'EPSG:4937', coordinates: [10, 54, 1] })).status).toBe(403);

    const page = await as('auditor').get('/api/v1/sites?sort=latitudeDeg&order=desc&pageSize=2&page=1');
    expect(page.status).toBe(200);
    expect(page.body.items).toHaveLength(2);
    expect(page.body.total).toBeGreaterThanOrEqual(5);
    expect(page.body.items[0].grs80.latitudeDeg).toBeGreaterThanOrEqual(page.body.items[1].grs80.latitudeDeg);
    const filtered = await as('auditor').get('/api/v1/sites?q=HMO');
    expect(filtered.body.items.every((s: { institute: { code: string }; name: string }) => s.institute.code === 'HMO' || s.name.includes('HMO'))).toBe(true);
  });
});

describe('quasigeoid grids', () => {
  // A plane ζ = 30 + 0.5·(φ − 50) + 0.25·(λ − 8): bilinear interpolation reproduces it exactly (identity; common practice).
  const plane = (lat: number, lon: number) => 30 + 0.5 * (lat - 50) + 0.25 * (lon - 8);
  const lines = ['# test grid', '# latitude longitude height'];
  for (let lat = 50; lat <= 52; lat += 0.5) for (let lon = 8; lon <= 11; lon += 0.5) lines.push(`${lat} ${lon} ${plane(lat, lon)}`);
  let gridId = '';

  it('the coordinator uploads a grid; a repeated upload is a 409; a malformed line is named', async () => {
    const res = await as('coord').post('/api/v1/quasigeoid-grids', { name: 'Test plane grid', uncertaintyM: 0.025, fileName: 'plane.txt', content: lines.join('\n') });
    expect(res.status).toBe(201);
    expect(res.body).toMatchObject({ nodeCount: 35, latitudeMinDeg: 50, latitudeMaxDeg: 52, longitudeMaxDeg: 11 });
    gridId = res.body.id;
    expect((await as('coord').post('/api/v1/quasigeoid-grids', { name: 'again', uncertaintyM: 0.025, content: lines.join('\n') })).status).toBe(409);
    const bad = await as('coord').post('/api/v1/quasigeoid-grids', { name: 'bad', uncertaintyM: 0.025, content: '# x\n50 8 1\n50 8.5 one\n' });
    expect(bad.status).toBe(400);
    expect(bad.body.issues[0]).toMatchObject({ path: 'body.content', line: 3 });
  });

  it('a site takes ζ from the grid by bilinear interpolation; outside the grid is a 400 naming the field', async () => {
    const res = await as('scl').post('/api/v1/sites', { ...baseSite, name: 'Grid site', crs: 'EPSG:4937', coordinates: [9.37, 51.21, 250], quasigeoid: { source: 'grid', gridId } });
    expect(res.status).toBe(201);
    expect(res.body.quasigeoid).toMatchObject({ source: 'grid', gridId, gridName: 'Test plane grid', uncertaintyM: 0.025 });
    expect(res.body.quasigeoid.heightM).toBeCloseTo(plane(51.21, 9.37), 9);
    expect(res.body.normalHeight.valueM).toBeCloseTo(250 - plane(51.21, 9.37), 9);
    const out = await as('scl').post('/api/v1/sites', { ...baseSite, name: 'Outside site', crs: 'EPSG:4937', coordinates: [12.5, 51, 250], quasigeoid: { source: 'grid', gridId } });
    expect(out.status).toBe(400);
    expect(out.body.issues[0].path).toBe('body.quasigeoid.gridId');
    expect(out.body.detail).toMatch(/outside the grid/);
  });
});

describe('clocks and budget versions', () => {
  let siteId = '';
  let clockId = '';
  const rows = [
    { effect: 'Blackbody radiation', correction: 4.9e-15, uncertainty: 3e-18, type: 'B', note: '' },
    { effect: 'Density shift', correction: 1e-18, uncertainty: 4e-18, type: 'A', note: '' },
  ];

  it('creates a clock with version 1 of its budget; totals are RSS (GUM eq. 10) and sums', async () => {
    siteId = (await t.ds.query("SELECT id FROM site WHERE name = 'SCL clock hall'"))[0].id;
    const res = await as('scl').post('/api/v1/clocks', { siteId, name: 'SCL-Test1', kind: 'optical_lattice', species: 'Sr87', nominalFrequencyHz: '429228004229873.0', budget: rows });
    expect(res.status).toBe(201);
    clockId = res.body.id;
    expect(res.body.nominalFrequencyHz).toBe('429228004229873.0');
    expect(res.body.currentBudget.version).toBe(1);
    // 3-4-5: √(3² + 4²) = 5 (×1e-18)
    expect(res.body.currentBudget.totalUncertainty).toBeCloseTo(5e-18, 30);
    expect(res.body.currentBudget.totalCorrection).toBeCloseTo(4.901e-15, 28);
    const [row] = await t.ds.query('SELECT nominal_frequency_hz, current_budget_version FROM clock WHERE id = $1', [clockId]);
    expect(row).toEqual({ nominal_frequency_hz: '429228004229873.0', current_budget_version: 1 });
  });

  it('refuses nominal frequencies given as numbers or with more than 20 significant digits', async () => {
    const asNumber = await as('scl').post('/api/v1/clocks', { siteId, name: 'Bad1', kind: 'optical_lattice', species: 'Sr87', nominalFrequencyHz: 429228004229873 });
    expect(asNumber.status).toBe(400);
    expect(paths(asNumber)).toEqual(['body.nominalFrequencyHz']);
    const tooLong = await as('scl').post('/api/v1/clocks', { siteId, name: 'Bad2', kind: 'optical_lattice', species: 'Sr87', nominalFrequencyHz: '429228004229873.123456' });
    expect(tooLong.status).toBe(400);
    expect(paths(tooLong)).toEqual(['body.nominalFrequencyHz']);
    const badRow = await as('scl').post('/api/v1/clocks', { siteId, name: 'Bad3', kind: 'sundial', species: 'Sr87', nominalFrequencyHz: '1', budget: [{ effect: '', correction: 0, uncertainty: -1, type: 'C' }] });
    expect(paths(badRow)).toEqual(expect.arrayContaining(['body.kind', 'body.budget.0.effect', 'body.budget.0.uncertainty', 'body.budget.0.type']));
    const taken = await as('scl').post('/api/v1/clocks', { siteId, name: 'SCL-Sr1', kind: 'optical_lattice', species: 'Sr87', nominalFrequencyHz: '1' });
    expect(taken.status).toBe(400);
    expect(paths(taken)).toEqual(['body.name']);
  });

  it('every budget change is a new immutable version; the history keeps them all', async () => {
    const v2 = await as('scl').post(`/api/v1/clocks/${clockId}/budget-versions`, { rows: [...rows, { effect: 'Servo error', correction: 0, uncertainty: 12e-18, type: 'A', note: 'new' }], comment: 'servo added' });
    expect(v2.status).toBe(201);
    expect(v2.body.version).toBe(2);
    expect(v2.body.totalUncertainty).toBeCloseTo(13e-18, 30); // √(3² + 4² + 12²) = 13 (×1e-18)
    const hist = await as('auditor').get(`/api/v1/clocks/${clockId}/budget-versions`);
    expect(hist.body.items.map((v: { version: number }) => v.version)).toEqual([2, 1]);
    expect(hist.body.items[1].rows).toHaveLength(2);
    const clock = await as('auditor').get(`/api/v1/clocks/${clockId}`);
    expect(clock.body.currentBudget.version).toBe(2);
    await expect(t.ds.query('UPDATE clock_budget_version SET total_uncertainty = 0 WHERE clock_id = $1', [clockId])).rejects.toThrow(/immutable/);
    await expect(t.ds.query('DELETE FROM clock_budget_version WHERE clock_id = $1', [clockId])).rejects.toThrow(/immutable/);
  });

  it('another institute cannot change the clock or its budget', async () => {
    expect((await as('hmo').patch(`/api/v1/clocks/${clockId}`, { notes: 'x' })).status).toBe(403);
    expect((await as('hmo').post(`/api/v1/clocks/${clockId}/budget-versions`, { rows: [] })).status).toBe(403);
    const hmoSite = (await t.ds.query("SELECT id FROM site WHERE name = 'HMO clock hall'"))[0].id;
    expect((await as('scl').post('/api/v1/clocks', { siteId: hmoSite, name: 'Sneaky', kind: 'optical_lattice', species: 'Sr87', nominalFrequencyHz: '1' })).status).toBe(403);
  });
});

describe('reference frequencies', () => {
  it('holds the CIPM 2009 values in use and the 2021 values marked as from memory — CIPM 2009 Recommendation 2', async () => {
    const res = await as('auditor').get('/api/v1/reference-frequencies');
    const inUse = (s: string) => res.body.items.find((r: { species: string; inUse: boolean }) => r.species === s && r.inUse);
    // CIPM 2009 Recommendation 2 (list of standard frequencies) — ⁸⁷Sr 429 228 004 229 873.7 Hz (u_r 1e-15); ¹⁷¹Yb⁺ E3 642 121 496 772 657 Hz (6e-14); Cs exact.
    expect(inUse('Sr87')).toMatchObject({ frequencyHz: '429228004229873.7', relativeUncertainty: 1e-15 });
    expect(inUse('Yb171+E3')).toMatchObject({ frequencyHz: '642121496772657', relativeUncertainty: 6e-14 });
    expect(inUse('Cs133')).toMatchObject({ frequencyHz: '9192631770', relativeUncertainty: 0 });
    const memory = res.body.items.filter((r: { source: string }) => /from memory/.test(r.source));
    expect(memory.length).toBeGreaterThanOrEqual(6);
    expect(memory.every((r: { inUse: boolean; source: string }) => !r.inUse && /confirm against the BIPM list/.test(r.source))).toBe(true);
  });

  it('only the coordinator changes the table; one value in use per species', async () => {
    const list = (await as('coord').get('/api/v1/reference-frequencies')).body.items;
    const memSr = list.find((r: { species: string; inUse: boolean }) => r.species === 'Sr87' && !r.inUse);
    expect((await as('scl').patch(`/api/v1/reference-frequencies/${memSr.id}`, { inUse: true })).status).toBe(403);
    const bad = await as('coord').post('/api/v1/reference-frequencies', { species: 'Hg199', frequencyHz: 1.1e15, relativeUncertainty: 1e-15, source: 'x' });
    expect(bad.status).toBe(400);
    expect(paths(bad)).toEqual(expect.arrayContaining(['body.frequencyHz', 'body.source']));
    const made = await as('coord').post('/api/v1/reference-frequencies', { species: 'Hg199', frequencyHz: '1128575290808154.4', relativeUncertainty: 6e-16, source: 'test entry', inUse: true });
    expect(made.status).toBe(201);
    const rows = await t.ds.query("SELECT count(*)::int AS n FROM reference_frequency WHERE species = 'Hg199' AND in_use");
    expect(rows[0].n).toBe(1);
  });
});

describe('fibre links', () => {
  it('computes the geodesic and chord distance beside the fibre length — GeographicLib GeodSolve0 (Karney 2013, J Geod 87:43; GeographicLib test suite)', async () => {
    // GeodSolve0 of the GeographicLib test suite: (40.6, −73.8) → (49.01666667, 2.55): s = 5 853 226 m ± 0.5 m (WGS 84; GRS80 differs by < 1 mm).
    const a = await as('scl').post('/api/v1/sites', { ...baseSite, name: 'Link end A', crs: 'EPSG:4326', coordinates: [-73.8, 40.6] });
    const b = await as('scl').post('/api/v1/sites', { ...baseSite, name: 'Link end B', crs: 'EPSG:4326', coordinates: [2.55, 49.01666667] });
    const res = await as('scl').post('/api/v1/links', { name: 'Transatlantic test link', siteAId: a.body.id, siteBId: b.body.id, fibreLengthKm: 6500, fractionalUncertainty: 1e-18 });
    expect(res.status).toBe(201);
    expect(Math.abs(res.body.geodesicDistanceKm * 1000 - 5853226)).toBeLessThan(0.5);
    expect(res.body.chordDistanceKm).toBeLessThan(res.body.geodesicDistanceKm);
    expect(res.body.fibreLengthKm).toBe(6500);
  });

  it('chord distance equator–pole on the ellipsoid is √(a² + b²) — GRS80 a, b (Moritz 2000)', async () => {
    const a = await as('scl').post('/api/v1/sites', { ...baseSite, name: 'Equator', crs: 'EPSG:4937', coordinates: [0, 0, 0] });
    const b = await as('scl').post('/api/v1/sites', { ...baseSite, name: 'Pole', crs: 'EPSG:4937', coordinates: [0, 90, 0] });
    const res = await as('scl').post('/api/v1/links', { name: 'Chord test', siteAId: a.body.id, siteBId: b.body.id, fibreLengthKm: 12000, fractionalUncertainty: 0 });
    expect(res.body.chordDistanceKm * 1000).toBeCloseTo(Math.hypot(6378137, 6356752.3141), 2);
  });

  it('refuses a link between two foreign sites and a link to itself', async () => {
    const hmo = (await t.ds.query("SELECT id FROM site WHERE name IN ('HMO clock hall', 'HMO ion lab') ORDER BY name"));
    expect((await as('scl').post('/api/v1/links', { name: 'Foreign link', siteAId: hmo[0].id, siteBId: hmo[1].id, fibreLengthKm: 1, fractionalUncertainty: 0 })).status).toBe(403);
    const self = await as('hmo').post('/api/v1/links', { name: 'Loop', siteAId: hmo[0].id, siteBId: hmo[0].id, fibreLengthKm: 1, fractionalUncertainty: 0 });
    expect(paths(self)).toEqual(['body.siteBId']);
  });

  it('lists the demo links sorted by fibre length', async () => {
    const res = await as('auditor').get('/api/v1/links?sort=fibreLengthKm&order=asc&q=HMO');
    expect(res.body.items.map((l: { name: string }) => l.name)).toEqual(['HMO local', 'SCL–HMO long-haul', 'SCL–HMO ion lab']);
    // demo geometry: the two labs are about 300 km apart (invented scenario)
    expect(res.body.items[1].geodesicDistanceKm).toBeGreaterThan(250);
    expect(res.body.items[1].geodesicDistanceKm).toBeLessThan(350);
  });
});

describe('reference ratio default (decimal.js as the independent reference library)', () => {
  it('is ν_B/ν_A of the CIPM 2009 values with RSS uncertainty; same species gives exactly 1', async () => {
    const ids = Object.fromEntries((await t.ds.query("SELECT name, id FROM clock WHERE name IN ('SCL-Sr1','HMO-Sr2','HMO-YbIon')")).map((r: { name: string; id: string }) => [r.name, r.id]));
    const same = await as('scl').get(`/api/v1/campaigns/default-reference-ratio?clockAId=${ids['SCL-Sr1']}&clockBId=${ids['HMO-Sr2']}`);
    expect(same.body).toMatchObject({ value: '1', relativeUncertainty: 0 });
    const mixed = await as('scl').get(`/api/v1/campaigns/default-reference-ratio?clockAId=${ids['HMO-Sr2']}&clockBId=${ids['HMO-YbIon']}`);
    const D = Decimal.clone({ precision: 60 });
    const expected = new D('642121496772657').div(new D('429228004229873.7'));
    expect(new D(mixed.body.value).minus(expected).abs().div(expected).toNumber()).toBeLessThan(1e-32);
    expect(mixed.body.relativeUncertainty).toBeCloseTo(Math.sqrt(6e-14 ** 2 + 1e-15 ** 2), 28);
    expect(mixed.body.source).toMatch(/CIPM 2009/);
  });
});
