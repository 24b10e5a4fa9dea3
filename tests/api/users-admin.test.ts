import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';

// An administrator moves a person to another institute: the row changes, and the audit event records what the
// row now holds (not merely what was asked for).
let t: TestApp;
let admin: string;
beforeAll(async () => {
  t = await createTestApp();
  admin = await tokenFor(t, 'yusra.holm@geopotential-office.invalid');
});
afterAll(() => t.close());

const row = async (email: string) =>
  (await t.ds.query('SELECT u.id, u.role, u.institute_id, i.code FROM app_user u LEFT JOIN institute i ON i.id = u.institute_id WHERE u.email = $1', [email]))[0] as { id: string; role: string; institute_id: string | null; code: string | null };
const instituteId = async (code: string) => ((await t.ds.query('SELECT id FROM institute WHERE code = $1', [code]))[0] as { id: string }).id;

describe('PATCH /api/v1/users/:id', () => {
  it('moves a person to another institute in the database, and audits the stored change', async () => {
    const before = await row('tomas.reyland@saltmarsh-lab.invalid');
    expect(before.code).toBe('SCL');
    const hmo = await instituteId('HMO');
    const res = await request(t.app).patch(`/api/v1/users/${before.id}`).set('authorization', `Bearer ${admin}`).send({ instituteId: hmo });
    expect(res.status).toBe(200);
    expect(res.body.institute.code).toBe('HMO');
    const after = await row('tomas.reyland@saltmarsh-lab.invalid');
    expect(after.institute_id).toBe(hmo);
    expect(after.code).toBe('HMO');
    const [event] = await t.ds.query(`SELECT details FROM audit_event WHERE action = 'user.updated' AND entity_id = $1 ORDER BY id DESC LIMIT 1`, [before.id]);
    expect(event.details.before.instituteId).toBe(before.institute_id);
    expect(event.details.after.instituteId).toBe(hmo);
  });

  it('changes role and institute together, and clears the institute of a non-operator', async () => {
    const p = await row('mira.ostrowe@highridge-obs.invalid');
    const res = await request(t.app).patch(`/api/v1/users/${p.id}`).set('authorization', `Bearer ${admin}`).send({ role: 'auditor', instituteId: null });
    expect(res.status).toBe(200);
    const after = await row('mira.ostrowe@highridge-obs.invalid');
    expect(after).toMatchObject({ role: 'auditor', institute_id: null });
  });

  it('refuses an unknown institute and leaves the row as it was', async () => {
    const p = await row('ines.varga@saltmarsh-lab.invalid');
    const res = await request(t.app).patch(`/api/v1/users/${p.id}`).set('authorization', `Bearer ${admin}`).send({ instituteId: '00000000-0000-4000-8000-000000000000' });
    expect(res.status).toBe(400);
    expect(await row('ines.varga@saltmarsh-lab.invalid')).toEqual(p);
  });
});
