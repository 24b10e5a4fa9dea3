import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { roles, type Role } from '../../shared/auth';
import { permissionTable } from '../../server/auth/permissions';
import { apiRoutes } from '../../server/routes';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';

// Table-driven: every route that exists, for every role that must be refused.
let t: TestApp;
const tokens = {} as Record<Role, string>;
const people: Record<Role, string> = {
  operator: 'ines.varga@saltmarsh-lab.invalid',
  coordinator: 'ansel.brandt@geopotential-office.invalid',
  auditor: 'petra.lind@audit-bureau.invalid',
  admin: 'yusra.holm@geopotential-office.invalid',
};
const concrete = (path: string) => path.replace(/:[A-Za-z]+/g, '00000000-0000-4000-8000-000000000000');

beforeAll(async () => {
  t = await createTestApp();
  for (const r of roles) tokens[r] = await tokenFor(t, people[r]);
});
afterAll(() => t.close());

const guarded = apiRoutes.filter((r) => r.permission !== 'public' && r.path.startsWith('/api/v1'));

describe('every /api/v1 route without a session or token', () => {
  it.each(guarded.map((r) => [r.method.toUpperCase(), r.path] as const))('%s %s answers 401', async (method, path) => {
    const res = await request(t.app)[method.toLowerCase() as 'get'](concrete(path)).send({});
    expect(res.status).toBe(401);
  });
});

const denials = guarded.flatMap((r) =>
  roles.filter((role) => !(permissionTable[r.permission as keyof typeof permissionTable] as readonly Role[]).includes(role)).map((role) => [role, r.method.toUpperCase(), r.path] as const),
);

describe('roles refused by the permission table', () => {
  it.each(denials)('%s is refused %s %s with 403', async (role, method, path) => {
    const res = await request(t.app)[method.toLowerCase() as 'get'](concrete(path)).set('authorization', `Bearer ${tokens[role]}`).send({});
    expect(res.status).toBe(403);
  });

  it('auditors hold no write permission except their own API tokens', () => {
    const writes = Object.entries(permissionTable).filter(([p, rs]) => (rs as readonly Role[]).includes('auditor') && !/:read$|^calc:use$|^me:read$|^tokens:own$/.test(p));
    expect(writes).toEqual([]);
  });
});
