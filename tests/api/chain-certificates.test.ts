import { createHash } from 'node:crypto';
import { mkdirSync, writeFileSync } from 'node:fs';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { computeCampaignResult } from '../../server/results/results.service';
import { chainCertificateSnapshotSchema } from '../../shared/certificates';
import { issuedCertificate, requestCertificate } from '../helpers/certificates';
import { createTestApp, tokenFor, type TestApp } from '../helpers/test-app';

// Certificates of a calibration chain against the invented demo chain (NGCO-TSr1 side by side at SCL before and after
// its stay at the Harbour Light tide gauge): issue through the job, the campaigns-accepted gate, the numbers against
// the chain API, verification of the signed file, scoping, reissue and withdrawal.

const CHAIN = 'NGCO-TSr1 Harbour Light chain (April–June 2026)';
const C2 = 299_792_458 ** 2; // m²/s², c exact (SI Brochure, 9th ed. 2019, Table 1)
let t: TestApp;
let coordinator: string;
let auditor: string;
let hmoOperator: string;
let sclOperator: string;
let chainId: string;
let parts: { remote: string; before: string; after: string };
let number: string;
let pdf: Buffer;

const sha256 = (b: Buffer) => createHash('sha256').update(b).digest('hex');
const get = (url: string, token: string) => request(t.app).get(url).set('authorization', `Bearer ${token}`);
const binaryParser = (res: NodeJS.ReadableStream, cb: (err: Error | null, body: Buffer) => void) => {
  const chunks: Buffer[] = [];
  res.on('data', (c: Buffer) => chunks.push(c));
  res.on('end', () => cb(null, Buffer.concat(chunks)));
};
const download = async (n: string, token: string) => {
  const res = await get(`/api/v1/certificates/${n}/pdf`, token).buffer(true).parse(binaryParser as never);
  return res;
};
const verifyFile = (file: Buffer) => request(t.app).post('/api/v1/certificates/verify').attach('file', file, { filename: 'certificate.pdf', contentType: 'application/pdf' });
const certify = (token: string, body: Record<string, unknown> = { comment: 'Chain reviewed: calibrations, deployments and the pinned budgets.' }) =>
  request(t.app).post(`/api/v1/chains/${chainId}/certificates`).set('authorization', `Bearer ${token}`).send(body);

beforeAll(async () => {
  t = await createTestApp();
  coordinator = await tokenFor(t, 'ansel.brandt@geopotential-office.invalid');
  auditor = await tokenFor(t, 'petra.lind@audit-bureau.invalid');
  hmoOperator = await tokenFor(t, 'mira.ostrowe@highridge-obs.invalid');
  sclOperator = await tokenFor(t, 'ines.varga@saltmarsh-lab.invalid');
  const [row] = await t.ds.query('SELECT * FROM calibration_chain WHERE name = $1', [CHAIN]);
  chainId = row.id;
  parts = { remote: row.remote_campaign_id, before: row.before_campaign_id, after: row.after_campaign_id };
  // The campaigns' current results, as the result worker would have stored them.
  for (const id of Object.values(parts)) await t.ds.transaction((m) => computeCampaignResult(m, id, { actor: null, now: new Date() }));
}, 180_000);
afterAll(() => t.close());

describe('the demo seed', () => {
  it('issued one signed chain certificate for the demo chain, valid and verifying; withdrawn here so the tests can issue', async () => {
    const seeded: { number: string; state: string }[] = await t.ds.query(`SELECT number, state FROM certificate WHERE chain_id = $1`, [chainId]);
    expect(seeded).toEqual([{ number: expect.stringMatching(/^CL-\d{4}-\d{5}-r1$/), state: 'valid' }]);
    const file = (await download(seeded[0].number, auditor)).body as Buffer;
    const res = await verifyFile(file);
    expect(res.body).toMatchObject({ verdict: 'valid', certificate: { number: seeded[0].number, kind: 'chain' } });
    const revoke = await request(t.app).post(`/api/v1/certificates/${seeded[0].number}/revoke`).set('authorization', `Bearer ${coordinator}`)
      .send({ reason: 'Withdrawn by the test to issue the chain certificate afresh.' });
    expect(revoke.status, revoke.text).toBe(200);
  });
});

describe('asking for a chain certificate', () => {
  it('is refused (409 problem naming the campaign) while a campaign of the chain is not accepted, and stores nothing', async () => {
    const count = async () => (await t.ds.query('SELECT (SELECT count(*) FROM certificate_request WHERE chain_id = $1)::int AS r, (SELECT count(*) FROM certificate WHERE chain_id = $1)::int AS c', [chainId]))[0];
    const before = await count();
    await t.ds.query(`UPDATE campaign SET state = 'in_review' WHERE id = $1`, [parts.before]);
    try {
      const res = await certify(coordinator);
      expect(res.status, res.text).toBe(409);
      expect(res.headers['content-type']).toMatch(/application\/problem\+json/);
      expect(res.body.code).toBe('chain-campaigns-not-accepted');
      expect(res.body.campaigns).toEqual([expect.objectContaining({ id: parts.before, state: 'in_review' })]);
      expect(res.body.detail).toMatch(/is 'in_review'/);
      expect(await count()).toEqual(before);
    } finally {
      await t.ds.query(`UPDATE campaign SET state = 'accepted' WHERE id = $1`, [parts.before]);
    }
  });

  it('is refused to the auditor (403) and needs a comment (400 naming the field)', async () => {
    expect((await certify(auditor)).status).toBe(403);
    const res = await certify(coordinator, {});
    expect(res.status).toBe(400);
    expect(JSON.stringify(res.body.issues)).toContain('comment');
  });

  it('is answered 404 for a chain that does not exist', async () => {
    const res = await request(t.app).post('/api/v1/chains/00000000-0000-4000-8000-00000000beef/certificates').set('authorization', `Bearer ${coordinator}`).send({ comment: 'Certify a chain that is not there.' });
    expect(res.status).toBe(404);
  });
});

describe('the demo chain’s certificate', () => {
  it('is issued by the job (202, progress to done) as a chain certificate, with its rows, audit and mail', async () => {
    const out = await issuedCertificate(t, coordinator, `/api/v1/chains/${chainId}/certificates`, { comment: 'Chain reviewed: calibrations, deployments and the pinned budgets.' });
    expect(out.res.body.request).toMatchObject({ kind: 'issue', chainId, campaignId: null });
    number = out.number!;
    expect(number).toMatch(/^CL-\d{4}-\d{5}-r1$/);
    expect(out.certificate).toMatchObject({ state: 'valid', kind: 'chain', chainId, campaignId: null, campaignLabel: CHAIN });
    const [row] = await t.ds.query('SELECT kind, chain_id, campaign_id, state FROM certificate WHERE number = $1', [number]);
    expect(row).toEqual({ kind: 'chain', chain_id: chainId, campaign_id: null, state: 'valid' });
    const [req] = await t.ds.query('SELECT state, chain_id, campaign_id, created FROM certificate_request WHERE id = $1', [out.res.body.request.id]);
    expect(req).toEqual({ state: 'done', chain_id: chainId, campaign_id: null, created: true });
    const [audit] = await t.ds.query(`SELECT details FROM audit_event WHERE action = 'certificate.issued' AND entity_id = $1`, [number]);
    expect(audit.details).toMatchObject({ kind: 'chain', chainId });
    expect(audit.details.campaignIds.sort()).toEqual(Object.values(parts).sort());
    const mails: { subject: string; text: string }[] = await t.ds.query(`SELECT subject, text_body AS text FROM mail_outbox WHERE subject LIKE $1`, [`Chain certified:%${number}%`]);
    expect(mails.length).toBeGreaterThan(1); // the labs of the chain's clocks and the coordinator mailbox
    expect(mails[0].text).toMatch(/national datum authority/);
    const detail = await get(`/api/v1/certificates/${number}`, coordinator);
    expect(detail.status).toBe(200);
    expect(detail.body.chain.campaigns).toHaveLength(3);
    const dl = await download(number, coordinator);
    expect(dl.status).toBe(200);
    pdf = dl.body as Buffer;
    mkdirSync('test-results', { recursive: true });
    writeFileSync('test-results/chain-certificate.pdf', pdf);
  }, 120_000);

  it('asked for again gives the same certificate (created: false), not a second one', async () => {
    const again = await requestCertificate(t, coordinator, `/api/v1/chains/${chainId}/certificates`, { comment: 'Asked again by mistake.' });
    expect(again.res.status).toBe(202);
    expect(again.progress).toMatchObject({ state: 'done', certificateNumber: number, created: false });
    expect(await t.ds.query(`SELECT number FROM certificate WHERE chain_id = $1 AND state = 'valid'`, [chainId])).toEqual([{ number }]);
  }, 60_000);

  it('states the numbers of the chain API’s result (ΔC, ΔH with u_c, U, k, p, ν_eff; the budget; the parts)', async () => {
    const snap = await get(`/api/v1/certificates/${number}/snapshot`, coordinator);
    expect(snap.status).toBe(200);
    const s = chainCertificateSnapshotSchema.parse(snap.body);
    const r = (await get(`/api/v1/chains/${chainId}/result`, coordinator)).body;
    expect(s.kind).toBe('chain');
    expect(s.schemaVersion).toBe(1);
    for (const key of ['value', 'standardUncertainty', 'expandedUncertainty', 'coverageFactor', 'coverageProbability', 'effectiveDegreesOfFreedom'] as const) {
      expect(s.deltaC_m2s2[key]).toBe(r.deltaC_m2s2[key]);
      expect(s.deltaH_m[key]).toBe(r.deltaH_m[key]);
    }
    expect([s.yRemote, s.ySideBySide, s.yChain]).toEqual([r.yRemote, r.ySideBySide, r.yChain]);
    expect(s.budget.rows.map((l) => [l.label, l.sensitivity_m2s2, l.contribution_m2s2, l.standardUncertainty])).toEqual(r.lines.map((l: Record<string, unknown>) => [l.label, l.sensitivity_m2s2, l.contribution_m2s2, l.standardUncertainty]));
    expect(s.transport).toMatchObject({ standardUncertainty: r.transport.standardUncertainty, origin: 'before-after' });
    expect(s.beforeAfter?.En).toBe(r.beforeAfter.en);
    // ΔC = c²·(y_remote − ȳ_side-by-side): first-order redshift, Mehlstäubler et al. 2018, Rep. Prog. Phys. 81:064401, eq. 1.
    expect(s.deltaC_m2s2.value / (C2 * (s.yRemote - s.ySideBySide))).toBeCloseTo(1, 9);
    // u_c² = Σ (|cᵢ|·u(xᵢ))² over the grouped (independent) inputs: JCGM 100:2008 (GUM) §5.1.2 eq. (10).
    const uc = Math.sqrt(s.budget.rows.reduce((a, l) => a + l.contribution_m2s2 ** 2, 0));
    expect(uc / s.budget.combinedStandardUncertainty).toBeCloseTo(1, 9);
    // U = k·u_c: JCGM 100:2008 §6.2.1 eq. (18).
    expect(s.deltaC_m2s2.expandedUncertainty / (s.deltaC_m2s2.coverageFactor * uc)).toBeCloseTo(1, 9);
    // ΔH ≈ ΔC/g with g ≈ 9.81 m/s² near sea level at mid-latitude (from memory; Heiskanen & Moritz 1967 §4-3 give
    // normal gravity 9.78–9.83 m/s²): checks the order and sign of the height, not its digits.
    expect(s.deltaH_m.value / (s.deltaC_m2s2.value / 9.81)).toBeGreaterThan(0.99);
    expect(s.deltaH_m.value / (s.deltaC_m2s2.value / 9.81)).toBeLessThan(1.01);
    // The parts: one remote, two side-by-side calibrations, T's pinned budget version the same throughout (seeded v1).
    expect(s.campaigns.map((c) => c.role).sort()).toEqual(['remote', 'side-by-side-after', 'side-by-side-before']);
    expect(new Set(s.campaigns.map((c) => c.transportableBudgetVersion))).toEqual(new Set([1]));
    expect(s.cancellation.transportableCancels).toBe(true);
    expect(s.cancellation.statement).toMatch(/sensitivity exactly 0/);
    expect(s.budget.rows.some((l) => l.cancels && l.sensitivity_m2s2 === 0)).toBe(true);
    // The deployments of T over the chain: the trailer bay, Harbour Light, and back.
    expect(s.deployments.map((d) => d.site)).toHaveLength(3);
    expect(s.cautions.join(' ')).toMatch(/national datum authority/);
    expect(s.tideSystem).toBe('mean-tide');
  });

  it('verifies as a genuine chain certificate; one changed byte does not', async () => {
    const res = await verifyFile(pdf);
    expect(res.status).toBe(200);
    expect(res.body.verdict).toBe('valid');
    expect(res.body.certificate).toMatchObject({ number, kind: 'chain', campaignLabel: CHAIN, pdfSha256: sha256(pdf) });
    expect(res.body.headline).toMatch(/chain certificate/);
    const byNumber = await request(t.app).get('/api/v1/certificates/verify').query({ number, sha256: sha256(pdf) });
    expect(byNumber.body.verdict).toBe('valid');
    const copy = Buffer.from(pdf);
    copy[400] ^= 0x01;
    const bad = await verifyFile(copy);
    expect(bad.body.verdict).toBe('tampered');
    expect(bad.body.certificate).toBeNull();
  });

  it('is hidden from lab staff of an institute that cannot see the chain, in detail, file and lists', async () => {
    expect((await get(`/api/v1/chains/${chainId}`, hmoOperator)).status).toBe(404);
    for (const path of ['', '/pdf', '/snapshot']) {
      const res = await get(`/api/v1/certificates/${number}${path}`, hmoOperator);
      expect(res.status).toBe(404);
      expect(res.body.code).toBe('not-found');
    }
    const list = await get('/api/v1/certificates?pageSize=200', hmoOperator);
    expect(list.status).toBe(200);
    expect(JSON.stringify(list.body)).not.toContain(number);
    expect((await get(`/api/v1/certificates?chainId=${chainId}`, hmoOperator)).body.total).toBe(0);
    // Saltmarsh's lab runs the reference clock of every campaign of the chain: it sees the chain and its certificate.
    expect((await get(`/api/v1/certificates/${number}`, sclOperator)).status).toBe(200);
    expect((await get(`/api/v1/certificates?kind=chain`, sclOperator)).body.items.map((c: { number: string }) => c.number)).toContain(number);
    expect((await get(`/api/v1/certificates?kind=chain`, auditor)).body.items.map((c: { number: string }) => c.number)).toContain(number);
  });

  it('keeps its chain: a certified chain cannot be deleted, and the row cannot be pointed elsewhere', async () => {
    const del = await request(t.app).delete(`/api/v1/chains/${chainId}`).set('authorization', `Bearer ${coordinator}`);
    expect(del.status).toBe(409);
    expect(del.body.detail).toContain(number); // the valid certificate is named
    await expect(t.ds.query('UPDATE certificate SET chain_id = NULL, campaign_id = $2, kind = $3 WHERE number = $1', [number, parts.remote, 'campaign'])).rejects.toThrow(/cannot be changed/);
  });

  it('is reissued as revision 2 (revision 1 superseded) and can be withdrawn', async () => {
    const re = await issuedCertificate(t, coordinator, `/api/v1/certificates/${number}/reissue`, { reason: 'Deployment note of the return trip corrected.' });
    const r2 = re.number!;
    expect(r2).toBe(number.replace(/-r1$/, '-r2'));
    expect(re.certificate).toMatchObject({ kind: 'chain', state: 'valid' });
    const old = await get(`/api/v1/certificates/${number}`, coordinator);
    expect(old.body).toMatchObject({ state: 'superseded', supersededByNumber: r2 });
    const revoke = await request(t.app).post(`/api/v1/certificates/${r2}/revoke`).set('authorization', `Bearer ${coordinator}`).send({ reason: 'Test of the withdrawal of a chain certificate.' });
    expect(revoke.status, revoke.text).toBe(200);
    expect(revoke.body).toMatchObject({ state: 'revoked', kind: 'chain' });
    const file = (await download(r2, coordinator)).body as Buffer;
    const res = await verifyFile(file);
    expect(res.body.verdict).toBe('revoked');
    expect(res.body.headline).toMatch(/chain certificate has been withdrawn/);
  }, 120_000);
});
