import { mkdirSync, writeFileSync } from 'node:fs';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { roles, type Role } from '../../shared/auth';
import { permissionTable } from '../../server/auth/permissions';
import { computeCampaignResult } from '../../server/results/results.service';
import { apiRoutes } from '../../server/routes';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';
import { acceptAsReviewer } from '../helpers/accepted-campaign';
import { issuedCertificate } from '../helpers/certificates';

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

// ---------------------------------------------------------------------------------------------------------------
// The access matrix: every /api/v1 route × {anonymous, lab staff of the owning institute, lab staff of another
// institute, coordinator, auditor, administrator}. The records are Highridge's (HMO); Saltmarsh's lab staff (SCL)
// are the other institute and address them by id. Each cell asserts the status; every answer to a reading route
// is also searched for records the caller must not see (docs/decisions/0004-campaign-visibility.md).

type Principal = 'anonymous' | 'operator-own' | 'operator-other' | 'coordinator' | 'auditor' | 'admin';
const principals: Principal[] = ['anonymous', 'operator-own', 'operator-other', 'coordinator', 'auditor', 'admin'];
const roleOf: Record<Exclude<Principal, 'anonymous'>, Role> = { 'operator-own': 'operator', 'operator-other': 'operator', coordinator: 'coordinator', auditor: 'auditor', admin: 'admin' };
const matrixTokens = new Map<Principal, string>();
const GUESSED = '00000000-0000-4000-8000-00000000beef';
const obj = { draft: '', accepted: '', acceptedName: '', draftName: '', series: '', site: '', clock: '', link: '', benchmark: '', section: '', datum: '', run: '', refFreq: '', user: '', certificate: '', chain: '', closure: '', certificateRequest: '' };
/** Who may see the demo calibration chain (every campaign of it visible: server/auth/campaign-scope.ts). */
const chainVisible = new Map<Principal, boolean>();
let cells = 0;
const matrixLog: { principal: Principal; method: string; path: string; status: number; expected: number[] }[] = [];

describe('access matrix (every route × six callers)', () => {
  beforeAll(async () => {
    matrixTokens.set('operator-own', await tokenFor(t, 'mira.ostrowe@highridge-obs.invalid'));
    matrixTokens.set('operator-other', tokens.operator); // Saltmarsh
    matrixTokens.set('coordinator', tokens.coordinator);
    matrixTokens.set('auditor', tokens.auditor);
    matrixTokens.set('admin', tokens.admin);
    const one = async (sql: string, ...p: unknown[]) => ((await t.ds.query(sql, p))[0] as { id: string }).id;
    obj.draft = await one("SELECT id FROM campaign WHERE name = 'HMO Yb⁺/Sr local ratio, December 2026'");
    obj.accepted = await one("SELECT id FROM campaign WHERE name = 'HMO Yb⁺/Sr local ratio, October 2026'");
    obj.draftName = 'HMO Yb⁺/Sr local ratio, December 2026';
    obj.acceptedName = 'HMO Yb⁺/Sr local ratio, October 2026';
    // The coordinator accepts Highridge's in-review campaign, its result is computed (as the worker would) and certified.
    const accepted = await acceptAsReviewer(t, obj.accepted, tokens.coordinator);
    expect(accepted.status, accepted.text).toBe(200);
    await t.ds.transaction((m) => computeCampaignResult(m, obj.accepted, { actor: null, now: new Date() }));
    const issued = await issuedCertificate(t, tokens.coordinator, `/api/v1/campaigns/${obj.accepted}/certificates`,
      { comment: 'Certified after review.', justification: 'Test campaign: its exceptions are accepted for the test.' });
    obj.certificate = issued.certificate.number;
    obj.certificateRequest = issued.res.body.request.id;
    obj.series = await one('SELECT id FROM ratio_series WHERE campaign_id = $1', obj.accepted);
    obj.site = await one("SELECT id FROM site WHERE name = 'HMO ion lab'");
    obj.clock = await one("SELECT id FROM clock WHERE name = 'HMO-YbIon'");
    obj.link = await one("SELECT id FROM fibre_link WHERE name = 'HMO local'");
    obj.benchmark = await one('SELECT id FROM benchmark ORDER BY code LIMIT 1');
    obj.section = await one('SELECT id FROM levelling_section ORDER BY id LIMIT 1');
    obj.datum = await one('SELECT id FROM height_datum ORDER BY name LIMIT 1');
    obj.run = await one("SELECT id FROM adjustment_run WHERE state = 'done' ORDER BY created_at DESC LIMIT 1");
    obj.refFreq = await one('SELECT id FROM reference_frequency LIMIT 1');
    obj.user = await one("SELECT id FROM app_user WHERE email = 'mira.ostrowe@highridge-obs.invalid'");
    // The demo calibration chain (NGCO's transportable clock) and, from its campaigns, who may see it.
    const chainRow = (await t.ds.query("SELECT id FROM calibration_chain ORDER BY created_at LIMIT 1"))[0] as { id: string } | undefined;
    obj.chain = chainRow?.id ?? '';
    const parts: { state: string; inst: string; partner: string }[] = chainRow ? await t.ds.query(`
      SELECT c.state, c.institute_id AS inst, cb.institute_id AS partner FROM calibration_chain ch
      JOIN campaign c ON c.id IN (ch.remote_campaign_id, ch.before_campaign_id, ch.after_campaign_id) JOIN clock cb ON cb.id = c.clock_b_id
      WHERE ch.id = $1`, [chainRow.id]) : [];
    const instOf = async (email: string) => ((await t.ds.query('SELECT institute_id AS i FROM app_user WHERE email = $1', [email]))[0] as { i: string }).i;
    const own = await instOf('mira.ostrowe@highridge-obs.invalid');
    const other = await instOf(people.operator);
    const published = parts.every((x) => x.state === 'accepted' || x.state === 'certified');
    const reviewable = parts.every((x) => ['accepted', 'certified', 'submitted', 'in_review', 'returned'].includes(x.state));
    // The chain's result is computed from its campaigns' results (as the worker would have stored them).
    if (chainRow) {
      const ids: { id: string }[] = await t.ds.query('SELECT unnest(ARRAY[remote_campaign_id, before_campaign_id, after_campaign_id]) AS id FROM calibration_chain WHERE id = $1', [chainRow.id]);
      for (const { id } of ids.filter((x) => x.id)) {
        const has = await t.ds.query('SELECT 1 FROM comparison_result WHERE campaign_id = $1', [id]);
        if (has.length === 0) await t.ds.transaction((m) => computeCampaignResult(m, id, { actor: null, now: new Date() }));
      }
    }
    chainVisible.set('operator-own', !!chainRow && parts.every((x) => x.inst === own || x.partner === own));
    chainVisible.set('operator-other', !!chainRow && parts.every((x) => x.inst === other || x.partner === other));
    chainVisible.set('coordinator', !!chainRow && reviewable);
    chainVisible.set('admin', !!chainRow && reviewable);
    chainVisible.set('auditor', !!chainRow && published);
    // The demo loop's closure (HMO-Sr2 → HMO-YbIon → SCL-Sr1): its other two campaigns are accepted too, so every
    // caller who sees accepted campaigns sees it; Saltmarsh's lab does not (the HMO local campaign is Highridge's alone).
    for (const name of ['SCL–HMO Sr October run 2026', 'SCL–HMO ion lab Yb⁺/Sr, October 2026']) {
      const res = await acceptAsReviewer(t, await one('SELECT id FROM campaign WHERE name = $1', name), tokens.coordinator);
      expect(res.status, res.text).toBe(200);
    }
    obj.closure = await one('SELECT closure_id AS id FROM ratio_closure_campaign WHERE campaign_id = $1', obj.accepted);
  }, 120_000);

  afterAll(() => {
    mkdirSync('test-results', { recursive: true });
    writeFileSync('test-results/access-matrix.json', JSON.stringify({ cells, rows: matrixLog }, null, 1));
  });

  /** The real record each path parameter names (Highridge's), or a guessed id for callers allowed to write. */
  function concretePath(path: string, campaign: 'draft' | 'accepted', guessed: boolean): string {
    const pick = (): string => {
      // Browser sessions are named by the SHA-256 of their id, not by a UUID.
      if (path.startsWith('/api/v1/admin/sessions/')) return 'be'.repeat(32);
      if (guessed) return GUESSED;
      if (path.startsWith('/api/v1/campaigns/')) return campaign === 'draft' ? obj.draft : obj.accepted;
      if (path.startsWith('/api/v1/uploads/')) return path.endsWith('/progress') ? GUESSED : obj.series;
      if (path.startsWith('/api/v1/sites/')) return obj.site;
      if (path.startsWith('/api/v1/clocks/')) return obj.clock;
      if (path.startsWith('/api/v1/links/')) return obj.link;
      if (path.startsWith('/api/v1/network/benchmarks/')) return obj.benchmark;
      if (path.startsWith('/api/v1/network/sections/')) return obj.section;
      if (path.startsWith('/api/v1/network/datums/')) return obj.datum;
      if (path.startsWith('/api/v1/network/runs/')) return obj.run;
      if (path.startsWith('/api/v1/reference-frequencies/')) return obj.refFreq;
      if (path.startsWith('/api/v1/certificate-requests/')) return obj.certificateRequest;
      if (path.startsWith('/api/v1/users/')) return obj.user;
      if (path.startsWith('/api/v1/chains/')) return obj.chain || GUESSED;
      if (path.startsWith('/api/v1/network/closures/')) return obj.closure;
      return GUESSED;
    };
    return path
      .replace(':number', guessed ? 'CL-1999-99999-r1' : obj.certificate)
      .replace(/:[A-Za-z]+/g, pick);
  }

  /** Campaign-bound records: visible by the campaign rule (server/auth/campaign-scope.ts). */
  const campaignBound = (path: string) => /^\/api\/v1\/(campaigns\/:id|uploads\/:id(?!\/progress)|certificates\/:number|network\/closures\/:id)/.test(path);
  function seesCampaign(p: Principal, campaign: 'draft' | 'accepted'): boolean {
    if (p === 'operator-own') return true;
    if (p === 'operator-other' || p === 'anonymous') return false;
    return campaign === 'accepted';
  }

  function expectedStatus(r: (typeof apiRoutes)[number], p: Principal, campaign: 'draft' | 'accepted'): number[] {
    if (r.permission === 'public') return r.multipart || r.query ? [400] : [200];
    if (p === 'anonymous') return [401];
    if (!(permissionTable[r.permission as keyof typeof permissionTable] as readonly Role[]).includes(roleOf[p])) return [403];
    if (r.method !== 'get') {
      // Writers with a guessed id or an unusable body; lab staff of the other institute against Highridge's records.
      if (r.multipart) return [400, 404]; // the campaign is looked up before the (missing) file is read
      if (p !== 'operator-other' || !r.path.includes(':')) return r.body ? [400] : [404];
      const bodyOk = !r.body || r.body.safeParse({}).success;
      return bodyOk ? [403, 404] : [400];
    }
    if (r.path === '/api/v1/uploads/:id/progress') return [404];
    // A chain is visible to whoever may see every one of its campaigns; its result is computed from theirs.
    if (r.path.startsWith('/api/v1/chains/:id')) return chainVisible.get(p) ? [200] : [404];
    if (r.query && !r.query.safeParse({}).success) return [400];
    if (campaignBound(r.path)) {
      if (!seesCampaign(p, r.path.startsWith('/api/v1/campaigns/:id') ? campaign : 'accepted')) return [404];
      if (campaign === 'draft' && /\/result(\.csv)?$/.test(r.path)) return [404]; // visible, but nothing computed yet
    }
    return [200];
  }

  /** Records a caller must not find in any answer (the audit trail, a record of actions, excepted by policy). */
  function forbiddenText(p: Principal): string[] {
    if (p === 'operator-other') return [obj.draft, obj.draftName, obj.accepted, obj.acceptedName, obj.certificate, obj.series];
    if (p === 'coordinator' || p === 'auditor' || p === 'admin') return [obj.draft, obj.draftName];
    return [];
  }

  const api = apiRoutes.filter((r) => r.path.startsWith('/api/v1'));
  const cases = api.flatMap((r) => {
    const variants: ('draft' | 'accepted')[] = r.method === 'get' && r.path.startsWith('/api/v1/campaigns/:id') ? ['draft', 'accepted'] : ['accepted'];
    return variants.flatMap((v) => principals.map((p) => [p, r.method.toUpperCase(), r.path, v] as const));
  });
  // Reads first, so the writes (which never succeed here) run against the records as the reads saw them.
  cases.sort((a, b) => Number(a[1] !== 'GET') - Number(b[1] !== 'GET'));

  it.each(cases)('%s %s %s (%s)', async (p, method, path, campaign) => {
    const r = api.find((x) => x.method.toUpperCase() === method && x.path === path)!;
    const guessed = method !== 'GET' && p !== 'operator-other' && p !== 'anonymous';
    const url = concretePath(path, campaign, guessed);
    let req = request(t.app)[method.toLowerCase() as 'get'](url);
    const token = matrixTokens.get(p);
    if (token) req = req.set('authorization', `Bearer ${token}`);
    const res = method === 'GET' ? await req : await req.send(guessed ? [] : {});
    const expected = expectedStatus(r, p, campaign);
    matrixLog.push({ principal: p, method, path, status: res.status, expected });
    expect(expected, `${p} ${method} ${url}: ${(res.text ?? '').slice(0, 300)}`).toContain(res.status);
    cells++;
    if (res.status === 404 && campaignBound(path) && !(campaign === 'draft' && p === 'operator-own')) expect(res.body.code).toBe('not-found');
    if (method === 'GET' && res.status === 200 && path !== '/api/v1/audit-events') {
      // JSON, CSV and text answers are searched; a PDF is the certificate the caller may read.
      const type = String(res.headers['content-type'] ?? '');
      const text = type.includes('json') ? JSON.stringify(res.body) : type.startsWith('text/') ? res.text : '';
      for (const secret of forbiddenText(p)) expect(text, `${p} GET ${url} shows ${secret}`).not.toContain(secret);
    }
  });

  it('asserted every cell', () => {
    expect(cells).toBe(cases.length);
    expect(cells).toBeGreaterThan(6 * 70);
  });
});
