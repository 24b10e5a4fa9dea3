import Decimal from 'decimal.js';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';

// Directly measured optical frequency ratios as reference data, chosen by a lab as a campaign's reference ratio;
// never a default. The ratio values here are INVENTED test entries, not publications.

let t: TestApp;
const tok: Record<string, string> = {};
let ids: Record<string, string> = {};
let species: Record<string, string> = {};
beforeAll(async () => {
  t = await createTestApp();
  tok.hmo = await tokenFor(t, 'mira.ostrowe@highridge-obs.invalid');
  tok.coord = await tokenFor(t, 'ansel.brandt@geopotential-office.invalid');
  const rows: { name: string; id: string; species: string | null }[] = await t.ds.query(
    'SELECT name, id, species FROM clock UNION ALL SELECT name, id, NULL FROM fibre_link',
  );
  ids = Object.fromEntries(rows.map((r) => [r.name, r.id]));
  species = Object.fromEntries(rows.filter((r) => r.species).map((r) => [r.name, r.species!]));
});
afterAll(() => t.close());

const as = (who: string) => ({
  get: (url: string) => request(t.app).get(url).set('authorization', `Bearer ${tok[who]}`),
  post: (url: string, body: object = {}) => request(t.app).post(url).set('authorization', `Bearer ${tok[who]}`).send(body),
});
const campaign = (name: string, referenceRatio?: object) => ({
  name, clockAId: ids['HMO-Sr2'], clockBId: ids['HMO-YbIon'], linkId: ids['HMO local'],
  periodStart: '2027-03-01T00:00:00Z', periodEnd: '2027-03-05T00:00:00Z', ...(referenceRatio ? { referenceRatio } : {}),
});

describe('measured frequency ratios', () => {
  let direct: { id: string; value: string };
  let inverted: { id: string; value: string };

  it('are registered by coordinators with their publication, not by lab staff', async () => {
    const entry = {
      numeratorSpecies: species['HMO-YbIon'], denominatorSpecies: species['HMO-Sr2'],
      value: '1.4959787070000000000012', relativeUncertainty: 5e-17, source: 'INVENTED test entry, not a publication (test suite)',
    };
    expect((await as('hmo').post('/api/v1/measured-frequency-ratios', entry)).status).toBe(403);
    const res = await as('coord').post('/api/v1/measured-frequency-ratios', entry);
    expect(res.status).toBe(201);
    expect(res.body.value).toBe(entry.value);
    direct = res.body;
    const inv = await as('coord').post('/api/v1/measured-frequency-ratios', { ...entry, numeratorSpecies: entry.denominatorSpecies, denominatorSpecies: entry.numeratorSpecies, value: '0.66846' });
    expect(inv.status).toBe(201);
    inverted = inv.body;
    const bad = await as('coord').post('/api/v1/measured-frequency-ratios', { ...entry, source: 'x' });
    expect(bad.status).toBe(400);
    expect(JSON.stringify(bad.body)).toContain('source');
    const list = await as('hmo').get('/api/v1/measured-frequency-ratios');
    expect(list.status).toBe(200);
    expect(list.body.items.map((r: { id: string }) => r.id)).toEqual(expect.arrayContaining([direct.id, inverted.id]));
  });

  it('never become the default: a campaign without a choice keeps the reference-frequency ratio', async () => {
    const res = await as('hmo').post('/api/v1/campaigns', campaign('Default stays'));
    expect(res.status).toBe(201);
    expect(res.body.referenceRatio.value).not.toBe(direct.value);
    expect(res.body.referenceRatio.source).not.toMatch(/directly measured/);
    expect(res.body.referenceRatio.isDefault).toBe(true);
  });

  it('give ν_B/ν_A as published, or its reciprocal to 40 digits, with the publication as the source', async () => {
    const res = await as('hmo').post('/api/v1/campaigns', campaign('Measured ratio', { measuredRatioId: direct.id, justification: 'direct comparison is more accurate than the reference frequencies' }));
    expect(res.status).toBe(201);
    expect(res.body.referenceRatio.value).toBe(direct.value);
    expect(res.body.referenceRatio.relativeUncertainty).toBe(5e-17);
    expect(res.body.referenceRatio.source).toMatch(/directly measured optical frequency ratio.*INVENTED test entry/);
    expect(res.body.referenceRatio.isDefault).toBe(false);

    const r2 = await as('hmo').post('/api/v1/campaigns', campaign('Measured ratio inverted', { measuredRatioId: inverted.id, justification: 'the registered ratio is the other way round' }));
    expect(r2.status).toBe(201);
    // 1/0.66846 at 60 digits (decimal.js, an independent arbitrary-precision library), rounded to 40 significant digits
    const D = Decimal.clone({ precision: 60 });
    expect(new D(r2.body.referenceRatio.value).minus(new D(1).div('0.66846')).abs().toNumber()).toBeLessThan(1e-38);
    expect(r2.body.referenceRatio.source).toMatch(/reciprocal/);
  });

  it('refuse a ratio for another pair of species, naming the field', async () => {
    const other = await as('coord').post('/api/v1/measured-frequency-ratios', {
      numeratorSpecies: 'Hg199', denominatorSpecies: 'Al27+', value: '0.9', relativeUncertainty: 1e-16, source: 'INVENTED test entry for another pair',
    });
    expect(other.status).toBe(201);
    const res = await as('hmo').post('/api/v1/campaigns', campaign('Wrong pair', { measuredRatioId: other.body.id, justification: 'this should be refused' }));
    expect(res.status).toBe(400);
    expect(JSON.stringify(res.body)).toContain('body.referenceRatio.measuredRatioId');
  });
});
