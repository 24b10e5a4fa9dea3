import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { z } from 'zod';
import { apiRoutes } from '../../server/routes';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';

// A sort name is looked up in a table of columns. Names that every plain object inherits (__proto__,
// constructor, toString, hasOwnProperty) must be refused by the list's zod enum and must never reach a lookup:
// once `__proto__` was accepted, TypeORM wrote onto Object.prototype and every later ORDER BY failed.
const hostile = ['__proto__', 'constructor', 'toString', 'hasOwnProperty'];

let t: TestApp;
let admin: string;
beforeAll(async () => {
  t = await createTestApp();
  admin = await tokenFor(t, 'yusra.holm@geopotential-office.invalid');
});
afterAll(() => t.close());

function sortFieldsOf(schema: unknown): string[] | null {
  if (!(schema instanceof z.ZodObject)) return null;
  const sort = (schema.shape as Record<string, z.ZodTypeAny>).sort;
  if (!sort) return null;
  const inner = sort instanceof z.ZodOptional ? sort.unwrap() : sort;
  return inner instanceof z.ZodEnum ? (inner.options as string[]) : ['<free text>'];
}

// Every GET without path parameters: lists and aggregates alike.
const gets = apiRoutes.filter((r) => r.method === 'get' && r.path.startsWith('/api/v1') && !r.path.includes(':'));
const lists = gets.filter((r) => r.query && sortFieldsOf(r.query) !== null);

describe('sort names that every object inherits', () => {
  it('every list that sorts takes its sort field from a zod enum', () => {
    expect(lists.length).toBeGreaterThanOrEqual(8);
    for (const r of lists) expect(sortFieldsOf(r.query), r.path).not.toContain('<free text>');
  });

  it.each(gets.flatMap((r) => hostile.map((v) => [r.path, v] as const)))('GET %s?sort=%s is refused or ignored, never 5xx', async (path, value) => {
    const res = await request(t.app).get(`${path}?sort=${value}`).set('authorization', `Bearer ${admin}`);
    expect(res.status).toBeLessThan(500);
    const spec = gets.find((r) => r.path === path)!;
    if (sortFieldsOf(spec.query)) {
      expect(res.status).toBe(400);
      expect(res.body.issues.map((i: { path: string }) => i.path)).toContain('query.sort');
    }
  });

  it('afterwards every list still answers 200, sorted by each of its own fields', async () => {
    expect(({} as Record<string, unknown>).alias).toBeUndefined();
    for (const r of lists) {
      for (const field of sortFieldsOf(r.query)!) {
        const res = await request(t.app).get(`${r.path}?sort=${field}&order=desc`).set('authorization', `Bearer ${admin}`);
        expect(res.status, `${r.path}?sort=${field}: ${res.text.slice(0, 200)}`).toBe(200);
        expect(Array.isArray(res.body.items)).toBe(true);
      }
    }
    const tokens = await request(t.app).get('/api/v1/me/tokens').set('authorization', `Bearer ${admin}`);
    expect(tokens.status).toBe(200);
  });
});
