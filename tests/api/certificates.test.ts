import { createHash } from 'node:crypto';
import { spawnSync } from 'node:child_process';
import { mkdirSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { inject } from 'vitest';
import { VERIFY_UPLOAD_LIMIT_BYTES } from '../../shared/certificate-registry';
import { certificateSnapshotSchema } from '../../shared/certificates';
import { renderCertificatePdf } from '../../server/certificates/pdf/render-certificate';
import { signCertificate } from '../../server/certificates/issue';
import { signPades } from '../../server/certificates/pdf/pades';
import { ensureInstituteSigningIdentity, signPdf } from '../../server/certificates/pdf/signing';
import { fingerprintSha256, pemToDer } from '../../server/certificates/pki/der';
import { createCertificate } from '../../server/certificates/pki/x509';
import { latestResultForCampaign } from '../../server/results/results.service';
import { acceptedCampaign } from '../helpers/accepted-campaign';
import { issuedCertificate, requestCertificate } from '../helpers/certificates';
import { caughtMail, createTestApp, tokenFor, type TestApp } from '../helpers/test-app';

// The certificate registry end to end: issue, idempotence, reissue, withdrawal, public verification of files and of
// number + SHA-256, participant mail and the audit trail. Signature checks follow ISO 32000-1:2008 12.8 (byte range
// over the whole file), RFC 5652 (CMS SignedData), RFC 3161 (time-stamps), RFC 5280 (CRLs) and ETSI EN 319 142-1
// (PAdES B-LTA). Independent cross-checks: Debian poppler-utils' pdfsig and pdfdetach, NSS certutil, OpenSSL.

const COORDINATOR = 'ansel.brandt@geopotential-office.invalid';
const ADMIN = 'yusra.holm@geopotential-office.invalid';
const AUDITOR = 'petra.lind@audit-bureau.invalid';
const OPERATOR = 'ines.varga@saltmarsh-lab.invalid';

let t: TestApp;
let coordinator: string;
let auditor: string;
let campaignId: string;
const work = mkdtempSync(path.join(tmpdir(), 'chronolevel-cert-api-'));
const sha256 = (b: Buffer) => createHash('sha256').update(b).digest('hex');

const binaryParser = (res: NodeJS.ReadableStream & { setEncoding: (e: string) => void }, cb: (err: Error | null, body: Buffer) => void) => {
  const chunks: Buffer[] = [];
  res.on('data', (c: Buffer) => chunks.push(c));
  res.on('end', () => cb(null, Buffer.concat(chunks)));
};

async function download(number: string, token = auditor): Promise<Buffer> {
  const res = await request(t.app).get(`/api/v1/certificates/${number}/pdf`).set('authorization', `Bearer ${token}`).buffer(true).parse(binaryParser as never);
  expect(res.status).toBe(200);
  expect(res.headers['content-type']).toBe('application/pdf');
  return res.body as Buffer;
}

const verifyFile = (pdf: Buffer) => request(t.app).post('/api/v1/certificates/verify').attach('file', pdf, { filename: 'certificate.pdf', contentType: 'application/pdf' });
const verifyNumber = (number: string, digest: string) => request(t.app).get('/api/v1/certificates/verify').query({ number, sha256: digest });

/** A genuine incremental update (ISO 32000-1 7.5.6): a new Info dictionary, xref section and trailer with /Prev. */
function appendIncrementalUpdate(pdf: Buffer): Buffer {
  const text = pdf.toString('latin1');
  const prev = Number([...text.matchAll(/startxref\s+(\d+)/g)].at(-1)![1]);
  const root = [...text.matchAll(/\/Root\s+(\d+\s+\d+\s+R)/g)].at(-1)![1];
  const size = Math.max(...[...text.matchAll(/\/Size\s+(\d+)/g)].map((m) => Number(m[1])));
  const body = `\n${size} 0 obj\n<< /Title (Altered after signing) >>\nendobj\n`;
  const xrefOffset = pdf.length + Buffer.byteLength(body, 'latin1');
  const tail = `xref\n${size} 1\n${String(pdf.length + 1).padStart(10, '0')} 00000 n \ntrailer\n<< /Size ${size + 1} /Root ${root} /Info ${size} 0 R /Prev ${prev} >>\nstartxref\n${xrefOffset}\n%%EOF\n`;
  return Buffer.concat([pdf, Buffer.from(body + tail, 'latin1')]);
}

beforeAll(async () => {
  // The demo seed signs with the key in SECRETS_DIR; point it at the folder this app pins.
  process.env.SECRETS_DIR = inject('secretsDir');
  t = await createTestApp();
  coordinator = await tokenFor(t, COORDINATOR);
  auditor = await tokenFor(t, AUDITOR);
  campaignId = await acceptedCampaign(t, 'Certificate test campaign', '2026-08-01T00:00:00Z');
});
afterAll(async () => {
  await t?.close();
  rmSync(work, { recursive: true, force: true });
});

describe('demo scenario', () => {
  it('the seed certified one accepted demo campaign, signed with the key this app pins', async () => {
    // One campaign certificate (the demo chain's certificate is checked in chain-certificates.test.ts).
    const seeded: { number: string; campaign_id: string }[] = await t.ds.query(`SELECT number, campaign_id FROM certificate WHERE kind = 'campaign' ORDER BY number`);
    expect(seeded).toHaveLength(1);
    const [campaign] = await t.ds.query(`SELECT state FROM campaign WHERE id = $1`, [seeded[0].campaign_id]);
    expect(campaign.state).toBe('certified');
    const res = await verifyFile(await download(seeded[0].number));
    expect(res.body.verdict).toBe('valid');
  });
});

describe('issuing', () => {
  let number: string;
  let pdf: Buffer;

  it('issues a signed certificate for an accepted campaign and certifies the campaign in the same transaction', async () => {
    // The request answers 202 with the progress resource; the worker renders, time-stamps, signs and stores.
    const out = await issuedCertificate(t, coordinator, `/api/v1/campaigns/${campaignId}/certificates`, { comment: 'Certified after review.', justification: 'Test campaign: its exceptions are accepted for the test.' });
    expect(out.res.body.request).toMatchObject({ kind: 'issue', campaignId });
    expect(out.progress).toMatchObject({ state: 'done', stage: 'finished', fraction: 1, created: true });
    number = out.certificate.number;
    const year = new Date().getUTCFullYear();
    expect(number).toMatch(new RegExp(`^CL-${year}-\\d{5}-r1$`));
    expect(out.certificate.state).toBe('valid');
    const requested = await t.ds.query(`SELECT details FROM audit_event WHERE action = 'certificate.requested' AND entity_id = $1`, [campaignId]);
    expect(requested).toHaveLength(1);

    const [row] = await t.ds.query(`SELECT state, revision, pdf_sha256, pdf, snapshot, campaign_id FROM certificate WHERE number = $1`, [number]);
    expect(row.state).toBe('valid');
    expect(row.campaign_id).toBe(campaignId);
    expect(sha256(row.pdf)).toBe(row.pdf_sha256);
    const [campaign] = await t.ds.query(`SELECT state FROM campaign WHERE id = $1`, [campaignId]);
    expect(campaign.state).toBe('certified');

    // The snapshot is complete by the shared schema and carries every part a certificate needs.
    const snapshot = certificateSnapshotSchema.parse(row.snapshot);
    expect(snapshot.certificateNumber).toBe(number);
    // The chain head is the last event before the issue itself (the result computation may precede it).
    const [head] = await t.ds.query(
      `SELECT hash FROM audit_event WHERE id < (SELECT id FROM audit_event WHERE action = 'certificate.issued' AND entity_id = $1) ORDER BY id DESC LIMIT 1`, [number]);
    expect(snapshot.auditChainHead).toBe(head.hash);
    const result = await latestResultForCampaign(t.ds.manager, campaignId);
    expect(snapshot.inputFiles.map((f) => f.sha256).sort()).toEqual(result!.result.inputFiles.map((f) => f.sha256).sort());
    expect(snapshot.softwareVersion).toBe(`Chronolevel ${result!.softwareVersion}`);
    expect(snapshot.deltaC_m2s2.value).toBe(result!.result.deltaC_m2s2.value);
    expect(snapshot.geodeticComparison.En).toBe(result!.result.geodesy!.en);
    // ΔC = c²·y (SI Brochure 2019: c exact): the budget in m²/s² is the fractional budget times c².
    expect(snapshot.budget.combinedStandardUncertainty).toBeCloseTo(result!.result.budget.combinedStandardUncertainty * 299792458 ** 2, 6);
    const uploads: { sha256: string }[] = await t.ds.query(`SELECT sha256 FROM ratio_series WHERE campaign_id = $1`, [campaignId]);
    expect(snapshot.inputFiles.map((f) => f.sha256).sort()).toEqual(uploads.map((u) => u.sha256).sort());

    pdf = await download(number);
    expect(sha256(pdf)).toBe(row.pdf_sha256);
  });

  it('finishes with the same certificate (created false) when the certified campaign has not changed', async () => {
    const out = await requestCertificate(t, coordinator, `/api/v1/campaigns/${campaignId}/certificates`, { comment: 'Certified after review.', justification: 'Test campaign: its exceptions are accepted for the test.' });
    expect(out.res.status).toBe(202);
    expect(out.progress).toMatchObject({ state: 'done', created: false, certificateNumber: number });
    const [{ count }] = await t.ds.query(`SELECT count(*)::int AS count FROM certificate WHERE campaign_id = $1`, [campaignId]);
    expect(count).toBe(1);
  });

  it('refuses auditors and lab staff (403) and leaves nothing behind', async () => {
    const res = await request(t.app).post(`/api/v1/certificates/${number}/revoke`).set('authorization', `Bearer ${auditor}`).send({ reason: 'auditor tries' });
    expect(res.status).toBe(403);
    const op = await request(t.app).post(`/api/v1/campaigns/${campaignId}/certificates`).set('authorization', `Bearer ${await tokenFor(t, OPERATOR)}`).send({ comment: 'Certified after review.', justification: 'Test campaign: its exceptions are accepted for the test.' });
    expect(op.status).toBe(403);
    const [row] = await t.ds.query(`SELECT state FROM certificate WHERE number = $1`, [number]);
    expect(row.state).toBe('valid');
  });

  it('lists and describes the certificate for the auditor, with the snapshot as JSON', async () => {
    const list = await request(t.app).get('/api/v1/certificates').query({ state: 'valid', campaignId }).set('authorization', `Bearer ${auditor}`);
    expect(list.status).toBe(200);
    expect(list.body.items.map((c: { number: string }) => c.number)).toEqual([number]);
    const detail = await request(t.app).get(`/api/v1/certificates/${number}`).set('authorization', `Bearer ${auditor}`);
    expect(detail.status).toBe(200);
    expect(detail.body.revisions).toHaveLength(1);
    const snap = await request(t.app).get(`/api/v1/certificates/${number}/snapshot`).set('authorization', `Bearer ${auditor}`);
    expect(snap.status).toBe(200);
    expect(certificateSnapshotSchema.safeParse(snap.body).success).toBe(true);
  });

  it('verifies the untouched file as valid, publicly (no session, no token)', async () => {
    const res = await verifyFile(pdf);
    expect(res.status).toBe(200);
    expect(res.body.verdict).toBe('valid');
    expect(res.body.certificate.number).toBe(number);
    expect(res.body.file.sha256).toBe(sha256(pdf));
    const byNumber = await verifyNumber(number, sha256(pdf).toUpperCase().replace(/(.{8})/g, '$1 '));
    expect(byNumber.status).toBe(200);
    expect(byNumber.body.verdict).toBe('valid');
  });

  it('reports a flipped byte inside the signed range as tampered', async () => {
    const copy = Buffer.from(pdf);
    copy[400] ^= 0x01;
    const res = await verifyFile(copy);
    expect(res.body.verdict).toBe('tampered');
    expect(res.body.reason).toMatch(/messageDigest|signed bytes/);
  });

  it('reports an appended incremental update as tampered', async () => {
    const res = await verifyFile(appendIncrementalUpdate(pdf));
    expect(res.body.verdict).toBe('tampered');
    expect(res.body.reason).toMatch(/appended/);
  });

  it('reports the same certificate signed under another root CA, or with a legacy self-signed key, as tampered', async () => {
    const snapshot = (await t.ds.query(`SELECT snapshot FROM certificate WHERE number = $1`, [number]))[0].snapshot;
    const otherRoot = createCertificate({ subject: { commonName: 'Elsewhere Root CA', organization: 'Elsewhere' }, profile: { kind: 'root-ca' }, bits: 2048 });
    const otherLeaf = createCertificate({ subject: { commonName: 'Elsewhere signing', organization: 'Elsewhere' }, profile: { kind: 'document-signing' }, issuer: otherRoot, bits: 2048 });
    const forged = await signPades(await renderCertificatePdf(snapshot), {
      signer: { keyPem: otherLeaf.keyPem, certificate: pemToDer(otherLeaf.certPem), chain: [pemToDer(otherRoot.certPem)] },
      tsaUrl: t.config.tsaUrl,
      validationData: async (tsaCerts) => ({ certificates: [pemToDer(otherLeaf.certPem), ...tsaCerts], crls: [] }),
    }, { reason: 'forgery', location: 'Elsewhere', name: 'Nobody' });
    const res = await verifyFile(forged);
    expect(res.body.verdict).toBe('tampered');
    expect(res.body.reason).toMatch(/not issued by the pinned institute root/);
    // The first releases' signature type, with a key this installation never pinned.
    const foreign = await ensureInstituteSigningIdentity(path.join(work, 'foreign'), { commonName: 'Someone else', organization: 'Elsewhere' });
    const legacy = await verifyFile(await signPdf(await renderCertificatePdf(snapshot), foreign, { reason: 'forgery', location: 'Elsewhere', name: 'Nobody' }));
    expect(legacy.body.verdict).toBe('tampered');
    expect(legacy.body.reason).toMatch(/legacy signature/);
  });

  it('answers "not issued here" for a correctly signed file or a number the registry does not hold', async () => {
    const snapshot = (await t.ds.query(`SELECT snapshot FROM certificate WHERE number = $1`, [number]))[0].snapshot;
    const unknown = await renderCertificatePdf({ ...snapshot, certificateNumber: 'CL-1999-99999-r1', revision: 1 });
    const { pdf: unknownFile } = await t.ds.transaction((m) => signCertificate(m, t.config, unknown, { reason: 'test', location: 'test', name: 'test' }));
    const res = await verifyFile(unknownFile);
    expect(res.body.verdict).toBe('not-issued-here');
    const byNumber = await verifyNumber('CL-1999-99999-r1', '0'.repeat(64));
    expect(byNumber.body.verdict).toBe('not-issued-here');
    const wrongDigest = await verifyNumber(number, 'f'.repeat(64));
    expect(wrongDigest.body.verdict).toBe('not-issued-here');
    expect(JSON.stringify(wrongDigest.body)).not.toContain(sha256(pdf));
  });

  it('reports the signature level, chain, trusted time, revocation status and attachments of an uploaded file', async () => {
    const res = await verifyFile(pdf);
    const sig = res.body.signature;
    expect(sig.level).toBe('B-LTA');
    expect(sig.chain).toHaveLength(2);
    expect(sig.timeStamp.tsa).toContain('Time-Stamping');
    expect(res.body.file.signingTime).toBe(sig.timeStamp.time);
    expect(sig.revocation.status).toBe('good');
    expect(sig.checks.length).toBeGreaterThan(6);
    expect(sig.checks.every((c: { passed: boolean }) => c.passed)).toBe(true);
    expect(sig.attachments.map((a: { name: string }) => a.name)).toEqual([`${number}.result.csv`, `${number}.snapshot.json`]);
  });

  it('publishes the root CA with its fingerprint, the CRL and the snapshot schema at stable public addresses', async () => {
    const anchor = await request(t.app).get('/api/v1/pki/trust-anchor');
    expect(anchor.status).toBe(200);
    const pem = await request(t.app).get('/api/v1/pki/institute-root-ca.pem');
    expect(pem.status).toBe(200);
    expect(fingerprintSha256(pemToDer(pem.text))).toBe(anchor.body.sha256Fingerprint);
    const res = await verifyFile(pdf);
    expect(res.body.signature.chain[1].sha256).toBe(anchor.body.sha256Fingerprint);
    writeFileSync(path.join(work, 'root.pem'), pem.text);
    const crl = await request(t.app).get('/api/v1/pki/institute-ca.crl').buffer(true).parse(binaryParser as never);
    expect(crl.status).toBe(200);
    expect(crl.headers['content-type']).toBe('application/pkix-crl');
    writeFileSync(path.join(work, 'institute.crl'), crl.body as Buffer);
    // OpenSSL checks the CRL's signature with the downloaded root.
    const check = spawnSync('openssl', ['crl', '-inform', 'DER', '-in', path.join(work, 'institute.crl'), '-CAfile', path.join(work, 'root.pem'), '-noout'], { encoding: 'utf8' });
    expect(check.stdout + check.stderr).toContain('verify OK');
    const schema = await request(t.app).get('/api/v1/schemas/certificate-snapshot.json');
    expect(schema.status).toBe(200);
    expect(schema.body.$id).toBe(`${t.config.publicUrl}/api/v1/schemas/certificate-snapshot.json`);
    expect(schema.body.required).toEqual(expect.arrayContaining(['certificateNumber', 'deltaC_m2s2', 'inputFiles', 'auditChainHead', 'softwareVersion']));
  });

  it('refuses a malformed query, an empty upload and an oversized one', async () => {
    const bad = await request(t.app).get('/api/v1/certificates/verify').query({ number: 'XYZ', sha256: '12' });
    expect(bad.status).toBe(400);
    expect(bad.body.issues.map((i: { path: string }) => i.path).sort()).toEqual(['query.number', 'query.sha256']);
    const empty = await request(t.app).post('/api/v1/certificates/verify').field('note', 'no file');
    expect(empty.status).toBe(400);
    expect(empty.body.issues[0].path).toBe('body.file');
    const huge = await verifyFile(Buffer.alloc(VERIFY_UPLOAD_LIMIT_BYTES + 1024, 0x20));
    expect(huge.status).toBe(413);
  });

  it('pdfsig (poppler-utils) reports the signature valid and trusted with the downloaded root in an NSS store (certutil)', () => {
    const file = path.join(work, `${number}.pdf`);
    writeFileSync(file, pdf);
    mkdirSync('test-results', { recursive: true });
    writeFileSync('test-results/certificate-api.pdf', pdf); // kept for looking at the pages (pdftoppm)
    const nss = path.join(work, 'nss');
    mkdirSync(nss, { recursive: true });
    expect(spawnSync('certutil', ['-N', '-d', `sql:${nss}`, '--empty-password']).status).toBe(0);
    expect(spawnSync('certutil', ['-A', '-d', `sql:${nss}`, '-n', 'Institute root CA', '-t', 'C,C,C', '-i', path.join(work, 'root.pem')]).status).toBe(0);
    const run = spawnSync('pdfsig', ['-nssdir', `sql:${nss}`, file], { encoding: 'utf8' });
    expect(run.error).toBeUndefined();
    writeFileSync('test-results/certificate-api.pdfsig.txt', run.stdout);
    const first = run.stdout.slice(run.stdout.indexOf('Signature #1'), run.stdout.indexOf('Signature #2'));
    expect(first).toContain('Signature Validation: Signature is Valid.');
    expect(first).toContain('Certificate Validation: Certificate is Trusted.');
    // The document time-stamp (the second signature) covers the whole file.
    expect(run.stdout.slice(run.stdout.indexOf('Signature #2'))).toContain('Total document signed');
  });

  it('pdfdetach (poppler-utils) extracts the embedded snapshot, identical to the stored one', async () => {
    const file = path.join(work, `${number}.pdf`);
    const list = spawnSync('pdfdetach', ['-list', file], { encoding: 'utf8' });
    expect(list.stdout).toContain(`${number}.snapshot.json`);
    const out = path.join(work, 'detached');
    mkdirSync(out, { recursive: true });
    expect(spawnSync('pdfdetach', ['-saveall', '-o', out, file]).status).toBe(0);
    const embedded = JSON.parse((await import('node:fs')).readFileSync(path.join(out, `${number}.snapshot.json`), 'utf8'));
    const [row] = await t.ds.query(`SELECT snapshot FROM certificate WHERE number = $1`, [number]);
    expect(embedded).toEqual(row.snapshot);
  });

  describe('reissue and withdrawal', () => {
    let r2: string;
    let r2Pdf: Buffer;

    it('reissues as revision 2 and marks revision 1 superseded with a pointer', async () => {
      const noReason = await request(t.app).post(`/api/v1/certificates/${number}/reissue`).set('authorization', `Bearer ${coordinator}`).send({});
      expect(noReason.status).toBe(400);
      const out = await issuedCertificate(t, coordinator, `/api/v1/certificates/${number}/reissue`, { reason: 'Corrected the link name in the clock record' });
      expect(out.res.body.request).toMatchObject({ kind: 'reissue', previousNumber: number });
      r2 = out.certificate.number;
      expect(r2).toBe(number.replace(/-r1$/, '-r2'));
      const rows = await t.ds.query(`SELECT number, state, superseded_by, (SELECT number FROM certificate n WHERE n.id = c.superseded_by) AS by FROM certificate c WHERE campaign_id = $1 ORDER BY revision`, [campaignId]);
      expect(rows.map((r: { state: string }) => r.state)).toEqual(['superseded', 'valid']);
      expect(rows[0].by).toBe(r2);
      r2Pdf = await download(r2);
      expect(sha256(r2Pdf)).not.toBe(sha256(pdf));
    });

    it('verification of revision 1 now says superseded and names the new number', async () => {
      const byNumber = await verifyNumber(number, sha256(pdf));
      expect(byNumber.body.verdict).toBe('superseded');
      expect(byNumber.body.certificate).toBeNull(); // the number and digest prove no more than the state; the file does
      const byFile = await verifyFile(pdf);
      expect(byFile.body.verdict).toBe('superseded');
      expect(byFile.body.certificate.latestNumber).toBe(r2);
      const again = await request(t.app).post(`/api/v1/certificates/${number}/reissue`).set('authorization', `Bearer ${coordinator}`).send({ reason: 'twice' });
      expect(again.status).toBe(409);
    });

    it('withdraws revision 2 with a reason; verification says revoked with reason and date', async () => {
      const noReason = await request(t.app).post(`/api/v1/certificates/${r2}/revoke`).set('authorization', `Bearer ${coordinator}`).send({ reason: '' });
      expect(noReason.status).toBe(400);
      expect(noReason.body.issues[0].path).toBe('body.reason');
      const res = await request(t.app).post(`/api/v1/certificates/${r2}/revoke`).set('authorization', `Bearer ${coordinator}`)
        .send({ reason: 'Clock B budget found incomplete after acceptance' });
      expect(res.status).toBe(200);
      expect(res.body.state).toBe('revoked');
      const [row] = await t.ds.query(`SELECT state, revoked_at, revocation_reason FROM certificate WHERE number = $1`, [r2]);
      expect(row.state).toBe('revoked');
      expect(row.revocation_reason).toBe('Clock B budget found incomplete after acceptance');
      const check = await verifyFile(r2Pdf);
      expect(check.body.verdict).toBe('revoked');
      expect(check.body.certificate.revocationReason).toBe('Clock B budget found incomplete after acceptance');
      expect(Date.parse(check.body.certificate.revokedAt)).toBe(new Date(row.revoked_at).getTime());
    });

    it('keeps every row: the database refuses deletion and changes to what was signed', async () => {
      await expect(t.ds.query(`DELETE FROM certificate WHERE number = $1`, [number])).rejects.toThrow(/never deleted/);
      await expect(t.ds.query(`UPDATE certificate SET pdf_sha256 = $2 WHERE number = $1`, [number, 'a'.repeat(64)])).rejects.toThrow(/cannot be changed/);
      await expect(t.ds.query(`UPDATE certificate SET state = 'valid' WHERE number = $1`, [r2])).rejects.toThrow(/stays revoked/);
    });

    it('wrote the audit trail: issued, superseded, reissued, revoked, and the campaign certified', async () => {
      const events = await t.ds.query(`SELECT action, entity_type, entity_id, details FROM audit_event WHERE (entity_type = 'certificate' AND entity_id IN ($1, $2)) OR (entity_type = 'campaign' AND entity_id = $3 AND action = 'campaign.certified') ORDER BY id`, [number, r2, campaignId]);
      expect(events.map((e: { action: string }) => e.action)).toEqual(['certificate.issued', 'campaign.certified', 'certificate.superseded', 'certificate.reissued', 'certificate.revoked']);
      expect(events[4].details.reason).toBe('Clock B budget found incomplete after acceptance');
      const trail = await request(t.app).get('/api/v1/audit-events').query({ entityType: 'certificate', entityId: r2 }).set('authorization', `Bearer ${auditor}`);
      expect(trail.body.items.map((e: { action: string }) => e.action)).toEqual(['certificate.revoked', 'certificate.reissued']);
    });

    it('mailed the operators of both institutes and the coordinator about the reissue and the withdrawal', async () => {
      await t.deps.mail.flush();
      const mail = await caughtMail();
      const [ids] = await t.ds.query(`SELECT institute_a_id, institute_b_id FROM certificate WHERE number = $1`, [r2]);
      const expected: string[] = (await t.ds.query(`SELECT email FROM app_user WHERE role = 'operator' AND institute_id IN ($1, $2)`, [ids.institute_a_id, ids.institute_b_id])).map((u: { email: string }) => u.email);
      expect(expected.length).toBeGreaterThan(0);
      for (const subject of [`Certificate ${number} replaced by ${r2}`, `Certificate ${r2} withdrawn`]) {
        const to = mail.filter((m) => m.subject === subject).flatMap((m) => m.to);
        expect(to.sort()).toEqual([...expected, t.config.coordinatorMail].sort());
      }
      const withdrawn = mail.find((m) => m.subject === `Certificate ${r2} withdrawn`)!;
      expect(withdrawn.text).toContain('Clock B budget found incomplete after acceptance');
    });

    it('issues a fresh certificate (new serial) for the campaign after the withdrawal', async () => {
      const { certificate } = await issuedCertificate(t, coordinator, `/api/v1/campaigns/${campaignId}/certificates`, { comment: 'Certified after review.', justification: 'Test campaign: its exceptions are accepted for the test.' });
      expect(certificate.number).not.toBe(number);
      expect((certificate as unknown as { serial: number }).serial).toBe(Number(/-(\d{5})-/.exec(number)![1]) + 1);
    });
  });

  describe('withdrawal of the signing key (compromise)', () => {
    it('is refused to the coordinator, and for the admin publishes a CRL, marks the affected certificates and rotates the key', async () => {
      const forbidden = await request(t.app).post('/api/v1/pki/signing-key/revoke').set('authorization', `Bearer ${coordinator}`).send({ reason: 'key file copied to a laptop' });
      expect(forbidden.status).toBe(403);
      const admin = await tokenFor(t, ADMIN);
      const before = await download(number);
      const compromisedSince = new Date(Date.now() - 3_600_000).toISOString();
      const res = await request(t.app).post('/api/v1/pki/signing-key/revoke').set('authorization', `Bearer ${admin}`)
        .send({ reason: 'key file copied to a laptop', compromisedSince });
      expect(res.status).toBe(200);
      expect(res.body.affectedCertificates).toEqual(expect.arrayContaining([number]));
      const [row] = await t.ds.query(`SELECT signing_key_serial, signing_key_revoked_at FROM certificate WHERE number = $1`, [number]);
      expect(row.signing_key_serial).toBe(res.body.serial);
      expect(row.signing_key_revoked_at).not.toBeNull();
      // The published CRL lists the key (OpenSSL's own reading of the CRL).
      const crl = await request(t.app).get('/api/v1/pki/institute-ca.crl').buffer(true).parse(binaryParser as never);
      writeFileSync(path.join(work, 'withdrawn.crl'), crl.body as Buffer);
      const text = spawnSync('openssl', ['crl', '-inform', 'DER', '-in', path.join(work, 'withdrawn.crl'), '-noout', '-text'], { encoding: 'utf8' }).stdout;
      expect(text.replace(/\s+/g, '')).toContain(`SerialNumber:${res.body.serial.toUpperCase()}`);
      expect(text).toContain('Key Compromise');
      // Signed within the compromised hour: no longer trusted, and the registry says so.
      const check = await verifyFile(before);
      expect(check.body.verdict).toBe('tampered');
      expect(check.body.reason).toMatch(/signing key was withdrawn/);
      expect(check.body.certificate.signingKeyRevokedAt).not.toBeNull();
      const byNumber = await verifyNumber(number, sha256(before));
      expect(byNumber.body.reason).toMatch(/key that signed this certificate was withdrawn/);
      const audit = await t.ds.query(`SELECT details FROM audit_event WHERE action = 'signing-key.revoked'`);
      expect(audit).toHaveLength(1);
      // The next certificate is signed with a new key under the same root and verifies.
      const fresh = await acceptedCampaign(t, 'After the key withdrawal', '2026-09-01T00:00:00Z');
      const issued = await issuedCertificate(t, coordinator, `/api/v1/campaigns/${fresh}/certificates`, { comment: 'Certified after review.', justification: 'Test campaign: its exceptions are accepted for the test.' });
      const newPdf = await download(issued.certificate.number);
      const ok = await verifyFile(newPdf);
      expect(ok.body.verdict).toBe('valid');
      expect(ok.body.signature.signer.serial).not.toBe(res.body.serial);
    });
  });
});
