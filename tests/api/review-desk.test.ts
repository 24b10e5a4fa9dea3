import { execFileSync, spawnSync } from 'node:child_process';
import { createHash } from 'node:crypto';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, inject, it } from 'vitest';
import { reviewChecklistItems } from '../../shared/campaigns';
import { certificateSnapshotSchema } from '../../shared/certificates';
import { adjustmentOptionsSchema } from '../../shared/network';
import { gatherInputs } from '../../server/network/adjustment.service';
import { acceptAsReviewer, campaignInReview } from '../helpers/accepted-campaign';
import { issuedCertificate } from '../helpers/certificates';
import { caughtMail, createTestApp, tokenFor, type TestApp } from '../helpers/test-app';

// The review desk: the reviewer's checklist, comments and justifications before accept and issue, the four-eyes
// rule (enabled for this installation), the lab's e-mails through the real test mailbox, and the campaign audit trail.

const COORD = 'ansel.brandt@geopotential-office.invalid';
const SECOND_COORD = 'lea.moreau@geopotential-office.invalid';
const OPERATOR = 'ines.varga@saltmarsh-lab.invalid';
const LAB_B = 'mira.ostrowe@highridge-obs.invalid';
const MAIL_DATE = /\d{4}-\d{2}-\d{2} \d{2}:\d{2} UTC/;

let t: TestApp;
const tok: Record<string, string> = {};
const work = mkdtempSync(path.join(tmpdir(), 'chronolevel-review-'));
beforeAll(async () => {
  process.env.SECRETS_DIR = inject('secretsDir');
  t = await createTestApp({ env: { REVIEW_FOUR_EYES: '1', REVIEW_MIN_UPTIME: '0.5' } });
  // A second coordinator of the same institute, so the four-eyes rule can be met.
  await t.ds.query(`INSERT INTO app_user (email, display_name, role, institute_id) SELECT $1, 'Lea Moreau', 'coordinator', institute_id FROM app_user WHERE email = $2`, [SECOND_COORD, COORD]);
  for (const [k, email] of Object.entries({ coord: COORD, coord2: SECOND_COORD, op: OPERATOR })) tok[k] = await tokenFor(t, email);
});
afterAll(async () => {
  await t?.close();
  rmSync(work, { recursive: true, force: true });
});

const post = (who: string, url: string, body: object = {}) => request(t.app).post(url).set('authorization', `Bearer ${tok[who]}`).send(body);
const get = (who: string, url: string) => request(t.app).get(url).set('authorization', `Bearer ${tok[who]}`);
const stateOf = async (id: string) => (await t.ds.query('SELECT state FROM campaign WHERE id = $1', [id]))[0].state as string;
async function mailsAbout(subjectPart: string) {
  await t.deps.mail.flush();
  return (await caughtMail()).filter((m) => m.subject.includes(subjectPart));
}

describe('accepting', () => {
  let id = '';
  beforeAll(async () => {
    id = await campaignInReview(t, 'Review desk campaign 5e1', '2026-08-10T00:00:00Z');
  });

  it('refuses an accept without a reviewer comment (400) and before the checklist is complete (409); nothing changes', async () => {
    const noComment = await post('coord', `/api/v1/campaigns/${id}/accept`, {});
    expect(noComment.status).toBe(400);
    expect(noComment.body.issues.map((i: { path: string }) => i.path)).toEqual(['body.comment']);
    const unticked = await post('coord', `/api/v1/campaigns/${id}/accept`, { comment: 'Looks complete.' });
    expect(unticked.status).toBe(409);
    expect(unticked.body.unticked).toEqual([...reviewChecklistItems]);
    expect(await stateOf(id)).toBe('in_review');
  });

  it('audits each tick and untick with the item and who did it; operators may not tick', async () => {
    expect((await post('op', `/api/v1/campaigns/${id}/checklist`, { item: 'tideSystem', checked: true })).status).toBe(403);
    const on = await post('coord', `/api/v1/campaigns/${id}/checklist`, { item: 'tideSystem', checked: true });
    expect(on.status).toBe(200);
    expect(on.body.review.checklist.find((c: { item: string }) => c.item === 'tideSystem')).toMatchObject({ checked: true, by: 'Ansel Brandt' });
    await post('coord', `/api/v1/campaigns/${id}/checklist`, { item: 'tideSystem', checked: false });
    const rows: { action: string; details: { item: string; checked: boolean } }[] = await t.ds.query(
      `SELECT action, details FROM audit_event WHERE entity_id = $1 AND action LIKE 'campaign.checklist%' ORDER BY id`, [id]);
    expect(rows.map((r) => [r.action, r.details.item, r.details.checked])).toEqual([
      ['campaign.checklist-ticked', 'tideSystem', true], ['campaign.checklist-unticked', 'tideSystem', false],
    ]);
  });

  it('accepts with the comment; stores, audits and mails it to both labs with dates as YYYY-MM-DD HH:MM UTC', async () => {
    const res = await acceptAsReviewer(t, id, tok.coord, { comment: 'Budgets and series checked against the log.' });
    expect(res.body.state).toBe('accepted');
    expect(res.body.review).toMatchObject({ acceptedBy: 'Ansel Brandt', acceptanceComment: 'Budgets and series checked against the log.' });
    const [row] = await t.ds.query('SELECT acceptance_comment, acceptance_justification, acceptance_exceptions, accepted_by_user_id FROM campaign WHERE id = $1', [id]);
    expect(row.acceptance_comment).toBe('Budgets and series checked against the log.');
    // The justification is kept only when the campaign had exceptions (then it is required).
    expect(row.acceptance_justification === null).toBe(row.acceptance_exceptions.length === 0);
    const [audit] = await t.ds.query(`SELECT details FROM audit_event WHERE entity_id = $1 AND action = 'campaign.accepted'`, [id]);
    expect(audit.details).toMatchObject({ from: 'in_review', to: 'accepted', comment: 'Budgets and series checked against the log.' });
    const mails = await mailsAbout('Campaign accepted: Review desk campaign 5e1');
    expect(mails.flatMap((m) => m.to).sort()).toEqual(expect.arrayContaining([OPERATOR, LAB_B]));
    expect(mails[0].text).toContain('Budgets and series checked against the log.');
    expect(mails[0].text).toMatch(MAIL_DATE);
    expect(mails[0].text).not.toMatch(/\d{2}:\d{2}:\d{2}\.\d{3}Z/);
  });

  it('issue needs a comment (400); under the four-eyes rule the person who accepted cannot issue (403), another coordinator can', async () => {
    expect((await post('coord2', `/api/v1/campaigns/${id}/certificates`, {})).status).toBe(400);
    const same = await post('coord', `/api/v1/campaigns/${id}/certificates`, { comment: 'Certified.', justification: 'Exceptions reviewed in the meeting.' });
    expect(same.status).toBe(403);
    expect(same.body.detail).toMatch(/four-eyes/i);
    expect(await stateOf(id)).toBe('accepted');
    // the rules are checked when the certificate is asked for: the refused request left no request and no job behind
    expect(await t.ds.query('SELECT id FROM certificate_request WHERE campaign_id = $1', [id])).toEqual([]);
    const other = await issuedCertificate(t, tok.coord2, `/api/v1/campaigns/${id}/certificates`, { comment: 'Second reviewer agrees.', justification: 'Exceptions reviewed in the meeting.' });
    expect(await stateOf(id)).toBe('certified');
    const [requested] = await t.ds.query(`SELECT details FROM audit_event WHERE action = 'certificate.requested' AND entity_id = $1`, [id]);
    expect(requested.details).toMatchObject({ comment: 'Second reviewer agrees.', justification: 'Exceptions reviewed in the meeting.' });
    const [cert] = await t.ds.query('SELECT snapshot, pdf FROM certificate WHERE number = $1', [other.certificate.number]);
    const snap = certificateSnapshotSchema.parse(cert.snapshot);
    expect(snap.review).toMatchObject({ acceptedBy: 'Ansel Brandt', acceptanceComment: 'Budgets and series checked against the log.', certifiedBy: 'Lea Moreau', certificationComment: 'Second reviewer agrees.' });
    // Exceptions and justifications go together: none without the other.
    expect(snap.review!.justifications.length > 0).toBe(snap.review!.exceptions.length > 0);
    const mails = await mailsAbout('Campaign certified: Review desk campaign 5e1');
    expect(mails.flatMap((m) => m.to)).toEqual(expect.arrayContaining([OPERATOR, LAB_B]));
    expect(mails[0].text).toMatch(MAIL_DATE);
    if (spawnSync('pdftotext', ['-v']).error === undefined) {
      const file = path.join(work, 'c.pdf');
      writeFileSync(file, cert.pdf);
      const text = execFileSync('pdftotext', ['-enc', 'UTF-8', file, '-'], { encoding: 'utf8' });
      expect(text).toContain('Review decision');
      expect(text).toContain('Second reviewer agrees.');
    }
  });
});

describe('exceptions need a justification', () => {
  it('a campaign with no result cannot be accepted without one (400, body.justification); with one it is stored and audited', async () => {
    const created = await post('op', '/api/v1/campaigns', {
      name: 'No data campaign 77b', clockAId: (await t.ds.query(`SELECT id FROM clock WHERE name = 'SCL-Sr1'`))[0].id,
      clockBId: (await t.ds.query(`SELECT id FROM clock WHERE name = 'HMO-Sr2'`))[0].id, linkId: (await t.ds.query(`SELECT id FROM fibre_link WHERE name = 'SCL–HMO long-haul'`))[0].id,
      periodStart: '2027-03-01T00:00:00Z', periodEnd: '2027-03-05T00:00:00Z',
    });
    const id = created.body.id as string;
    await post('op', `/api/v1/campaigns/${id}/submit`);
    await post('coord', `/api/v1/campaigns/${id}/start-review`);
    for (const item of reviewChecklistItems) await post('coord', `/api/v1/campaigns/${id}/checklist`, { item, checked: true });
    const detail = await get('coord', `/api/v1/campaigns/${id}`);
    // Reading computes nothing: the page says no result exists yet; accepting finds that none can be formed.
    expect(detail.body.review).toMatchObject({ exceptions: [], resultComputed: false });
    const refused = await post('coord', `/api/v1/campaigns/${id}/accept`, { comment: 'Accepting.' });
    expect(refused.status).toBe(400);
    expect(refused.body.issues).toEqual([expect.objectContaining({ path: 'body.justification', message: expect.stringContaining('no-result') })]);
    expect(await stateOf(id)).toBe('in_review');
    const ok = await post('coord', `/api/v1/campaigns/${id}/accept`, { comment: 'Accepting.', justification: 'Registry check only; the data follow in a separate campaign.' });
    expect(ok.status).toBe(200);
    expect(ok.body.review).toMatchObject({ acceptanceJustification: 'Registry check only; the data follow in a separate campaign.', acceptanceExceptions: [expect.stringContaining('No result')] });
    const [audit] = await t.ds.query(`SELECT details FROM audit_event WHERE entity_id = $1 AND action = 'campaign.accepted'`, [id]);
    expect(audit.details.justification).toBe('Registry check only; the data follow in a separate campaign.');
  });
});

describe('returning', () => {
  it('mails both labs the reason, dated YYYY-MM-DD HH:MM UTC', async () => {
    const id = await campaignInReview(t, 'Returned campaign 3c9', '2026-09-01T00:00:00Z');
    const res = await post('coord', `/api/v1/campaigns/${id}/return`, { reason: 'The amplifier log for day 2 is missing.' });
    expect(res.status).toBe(200);
    const mails = await mailsAbout('Campaign returned: Returned campaign 3c9');
    expect(mails.flatMap((m) => m.to)).toEqual(expect.arrayContaining([OPERATOR, LAB_B]));
    expect(mails[0].text).toContain('Reason: The amplifier log for day 2 is missing.');
    expect(mails[0].text).toMatch(MAIL_DATE);
  });
});

describe('the campaign audit trail', () => {
  it('holds every event of the campaign, its upload (file name, SHA-256) and certificate, numbered 1…n, transitions with their "to" state', async () => {
    const [c] = await t.ds.query(`SELECT id FROM campaign WHERE name = 'Review desk campaign 5e1'`);
    const res = await request(t.app).get(`/api/v1/campaigns/${c.id}/audit-trail`).set('authorization', `Bearer ${await tokenFor(t, 'petra.lind@audit-bureau.invalid')}`);
    expect(res.status).toBe(200);
    const items: { seq: number; action: string; details: Record<string, unknown> }[] = res.body.items;
    expect(items.map((e) => e.seq)).toEqual(items.map((_, i) => i + 1));
    const [series] = await t.ds.query('SELECT file_name, sha256 FROM ratio_series WHERE campaign_id = $1', [c.id]);
    expect(items.find((e) => e.action === 'campaign.series-uploaded')?.details).toMatchObject({ fileName: series.file_name, sha256: series.sha256 });
    const transitions = items.filter((e) => /^campaign\.(submitted|in_review|accepted|certified)$/.test(e.action));
    expect(transitions.map((e) => e.details.to)).toEqual(['submitted', 'in_review', 'accepted', 'certified']);
    expect(items.some((e) => e.action === 'certificate.issued')).toBe(true);
    const [{ n }] = await t.ds.query(`SELECT count(*)::int AS n FROM audit_event WHERE (entity_type = 'campaign' AND entity_id = $1) OR details->>'campaignId' = $1`, [c.id]);
    expect(res.body.total).toBe(n);
    expect((await get('op', `/api/v1/campaigns/${c.id}/audit-trail`)).status).toBe(403);
  });
});

describe('verification headline', () => {
  it('says a file with bytes appended after signing was changed after signing, not that it carries a foreign signature', async () => {
    const [{ number, pdf }] = await t.ds.query(`SELECT number, pdf FROM certificate WHERE state = 'valid' ORDER BY issued_at LIMIT 1`);
    const altered = Buffer.concat([pdf, Buffer.from('\n% appended after signing\n', 'latin1')]);
    const res = await request(t.app).post('/api/v1/certificates/verify').attach('file', altered, { filename: `${number}.pdf`, contentType: 'application/pdf' });
    expect(res.body.verdict).toBe('tampered');
    expect(res.body.tamper).toBe('changed-after-signing');
    expect(res.body.headline).toMatch(/changed after signing/i);
    expect(res.body.headline).not.toMatch(/not signed by|foreign/i);
  });
});

describe('the seeded adjustment run', () => {
  it('stores the SHA-256 of its real inputs, as a run queued through the API does', async () => {
    const [run] = await t.ds.query(`SELECT options, input_summary FROM adjustment_run WHERE state = 'done' ORDER BY created_at LIMIT 1`);
    const inputs = await gatherInputs(t.ds.manager, adjustmentOptionsSchema.parse(run.options));
    expect(run.input_summary.inputSha256).toBe(createHash('sha256').update(JSON.stringify(inputs)).digest('hex'));
  });
});

describe('OpenAPI', () => {
  it('documents every form field of the upload, that they come before the file, and the 409 and 413 answers', async () => {
    const doc = (await request(t.app).get('/api/v1/openapi.json')).body;
    const op = doc.paths['/api/v1/campaigns/{id}/uploads'].post;
    const body = op.requestBody;
    const props = Object.keys(body.content['multipart/form-data'].schema.properties);
    // Every field columnMappingSchema reads (shared/uploads.ts), and the file part last.
    expect(props).toEqual(['epochColumn', 'epochKind', 'valueColumn', 'valueKind', 'flagColumn', 'hasHeader', 'delimiter', 'file']);
    expect(body.description).toMatch(/first, then the part `file` last/);
    expect(Object.keys(op.responses)).toEqual(expect.arrayContaining(['201', '400', '409', '413']));
  });
});
