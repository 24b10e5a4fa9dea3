import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { apiRoutes } from '../../server/routes';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';

// Every list answers one envelope, {items, total, page, pageSize}, whether paged or short (common practice for
// this API: one shape lets every client page, count and grow a list without a breaking change).

let t: TestApp;
let doc: { paths: Record<string, Record<string, { summary?: string; responses: Record<string, { content?: Record<string, { schema?: Schema }> }> }>>; components?: { schemas?: Record<string, Schema> } };
type Schema = { type?: string | string[]; $ref?: string; properties?: Record<string, Schema>; required?: string[] };

beforeAll(async () => {
  t = await createTestApp();
  doc = (await request(t.app).get('/api/v1/openapi.json')).body;
});
afterAll(() => t.close());

function resolve(s: Schema | undefined): Schema | undefined {
  if (s?.$ref) return doc.components?.schemas?.[s.$ref.split('/').pop() ?? ''];
  return s;
}
const isArray = (s: Schema | undefined) => s?.type === 'array' || (Array.isArray(s?.type) && s.type.includes('array'));

describe('list envelope', () => {
  it('no GET operation in the OpenAPI document answers a bare array; every list has items, total, page and pageSize', () => {
    const bare: string[] = [];
    const incomplete: string[] = [];
    let lists = 0;
    for (const [path, ops] of Object.entries(doc.paths)) {
      const op = ops.get;
      if (!op) continue;
      const schema = resolve(op.responses['200']?.content?.['application/json']?.schema);
      if (isArray(schema)) bare.push(path);
      const items = resolve(schema?.properties?.items);
      if (isArray(items)) {
        lists++;
        for (const field of ['items', 'total', 'page', 'pageSize']) if (!schema?.required?.includes(field)) incomplete.push(`${path}: ${field}`);
      }
    }
    expect(bare).toEqual([]);
    expect(incomplete).toEqual([]);
    expect(lists).toBeGreaterThanOrEqual(20);
  });

  it('every GET route without path parameters answers an object, never an array, when called by the administrator', async () => {
    const admin = await tokenFor(t, 'yusra.holm@geopotential-office.invalid');
    const called: string[] = [];
    const bare: string[] = [];
    for (const r of apiRoutes) {
      if (r.method !== 'get' || r.raw || r.path.includes(':') || !r.response) continue;
      const res = await request(t.app).get(r.path).set('authorization', `Bearer ${admin}`);
      if (res.status !== 200) continue;
      called.push(r.path);
      if (Array.isArray(res.body)) bare.push(r.path);
    }
    expect(bare).toEqual([]);
    expect(called).toEqual(expect.arrayContaining(['/api/v1/institutes', '/api/v1/crs', '/api/v1/network/datums', '/api/v1/reference-frequencies', '/api/v1/measured-frequency-ratios', '/api/v1/quasigeoid-grids', '/api/v1/me/tokens']));
  });

  it('the short lists with an id (budget versions, uploads) use the same envelope', async () => {
    const coord = await tokenFor(t, 'ansel.brandt@geopotential-office.invalid');
    const clock: { id: string } = (await t.ds.query('SELECT id FROM clock ORDER BY name LIMIT 1'))[0];
    const versions = await request(t.app).get(`/api/v1/clocks/${clock.id}/budget-versions`).set('authorization', `Bearer ${coord}`);
    expect(versions.status).toBe(200);
    expect(versions.body).toMatchObject({ page: 1, total: versions.body.items.length });
    const campaign: { id: string } = (await t.ds.query("SELECT c.id FROM campaign c WHERE EXISTS (SELECT 1 FROM ratio_series s WHERE s.campaign_id = c.id) AND c.state IN ('accepted','certified') LIMIT 1"))[0];
    const uploads = await request(t.app).get(`/api/v1/campaigns/${campaign.id}/uploads`).set('authorization', `Bearer ${coord}`);
    expect(uploads.status).toBe(200);
    expect(uploads.body.items.length).toBeGreaterThan(0);
    expect(uploads.body.total).toBe(uploads.body.items.length);
  });
});

describe('OpenAPI summaries', () => {
  it('are the whole sentences of the route list, never cut mid-word', () => {
    const bySpec = new Map(apiRoutes.map((r) => [`${r.method} ${r.path.replace(/:([A-Za-z0-9_]+)/g, '{$1}')}`, r.summary]));
    const problems: string[] = [];
    for (const [path, ops] of Object.entries(doc.paths)) {
      for (const [method, op] of Object.entries(ops)) {
        const s = op.summary ?? '';
        const key = `${method} ${path}`;
        if (s !== bySpec.get(key)) problems.push(`${key}: differs from the route list`);
        if (!s.trim()) problems.push(`${key}: empty`);
        if (/(\.\.\.|…|[-–(,])$/.test(s.trim())) problems.push(`${key}: ends in "${s.slice(-3)}"`);
        const open = (s.match(/\(/g) ?? []).length;
        const close = (s.match(/\)/g) ?? []).length;
        if (open !== close) problems.push(`${key}: unbalanced brackets`);
        if (/\bE_n\b/.test(s)) problems.push(`${key}: spells E_n instead of Eₙ`);
      }
    }
    expect(problems).toEqual([]);
  });
});
