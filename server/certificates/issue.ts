import { createHash, randomUUID } from 'node:crypto';
import type { EntityManager } from 'typeorm';
import { formatCertificateNumber, type CertificateSnapshot, type ReviewDecision } from '../../shared/certificates';
import { certificationExceptions } from '../campaigns/review-rules';
import { closureExceptions } from '../closures/closures.service';
import { CampaignEntity } from '../db/entities/registry.entities';
import { labAddresses, mailDate } from '../mail/mail-text';
import { recordAudit } from '../audit/audit.service';
import { type Actor, actorLabel } from '../auth/actor';
import type { AppConfig } from '../config';
import { AuditEventEntity, InstituteEntity } from '../db/entities/core.entities';
import { CertificateEntity, type CertificateRow } from '../db/entities/certificates.entities';
import { Conflict, Forbidden, Invalid, NotFound } from '../http/errors';
import { enqueueMail } from '../mail/outbox';
import type { CertificateSource, SnapshotBody } from './certificate-source.types';
import { coordinatingInstitute, currentSigningKey, instituteSubject, publishCrl, trustedTsaRoots } from './institute-identity';
import { signPades, type PadesOptions } from './pdf/pades';
import { renderCertificatePdf } from './pdf/render-certificate';
import { parseCertificate } from './pki/der';
import { crlUrlsOf, fetchCrl } from './pki/x509';
import { faultPoint } from '../dev/fault-point';

// Issuing, reissuing and revoking inside the caller's transaction: number, snapshot, render, sign, store,
// audit and mail commit together or not at all.

export type LoadSource = (manager: EntityManager, campaignId: string, actor: Actor, now: Date) => Promise<CertificateSource>;
export type MarkCertified = (manager: EntityManager, campaignId: string, actor: Actor) => Promise<unknown>;

export interface IssueContext {
  manager: EntityManager;
  config: AppConfig;
  actor: Actor;
  loadSource: LoadSource;
  markCertified: MarkCertified;
  now?: Date;
  /** Told each stage as it starts (the certificate job records it as durable progress). */
  onStage?: (stage: string, fraction: number) => Promise<void>;
}

/** Key order fixed, so the same inputs always give the same fingerprint. */
export function canonicalJson(value: unknown): string {
  if (Array.isArray(value)) return `[${value.map(canonicalJson).join(',')}]`;
  if (value && typeof value === 'object') {
    return `{${Object.keys(value as object)
      .sort()
      .filter((k) => (value as Record<string, unknown>)[k] !== undefined)
      .map((k) => `${JSON.stringify(k)}:${canonicalJson((value as Record<string, unknown>)[k])}`)
      .join(',')}}`;
  }
  return JSON.stringify(value);
}

export function fingerprintOf(source: CertificateSource): string {
  return createHash('sha256').update(canonicalJson({ resultId: source.resultId, body: source.body })).digest('hex');
}

export const sha256Hex = (bytes: Buffer) => createHash('sha256').update(bytes).digest('hex');

/** Concurrent issues for one campaign queue up here (held until commit). */
async function lockCampaign(manager: EntityManager, campaignId: string): Promise<void> {
  await manager.query(`SELECT pg_advisory_xact_lock(hashtext($1))`, [`certificate:${campaignId}`]);
}

export async function nextSerial(manager: EntityManager, year: number): Promise<number> {
  const rows: { last_serial: number }[] = await manager.query(
    `INSERT INTO certificate_serial (year, last_serial) VALUES ($1, 1)
     ON CONFLICT (year) DO UPDATE SET last_serial = certificate_serial.last_serial + 1
     RETURNING last_serial`,
    [year],
  );
  return rows[0].last_serial;
}

export async function auditChainHead(manager: EntityManager): Promise<string> {
  const last = await manager.getRepository(AuditEventEntity).find({ order: { id: 'DESC' }, take: 1 });
  // An empty trail has no head; 64 zeros says so without breaking the snapshot schema.
  return last[0]?.hash || '0'.repeat(64);
}

export function verificationUrlFor(config: AppConfig, number: string): string {
  return `${config.publicUrl}/verify?number=${encodeURIComponent(number)}`;
}

export type CertifyDecision = { comment: string; justification?: string };

/**
 * The review decision printed on the certificate. Enforces the installation's rules: the four-eyes rule (the
 * person who accepted may not certify) and a written justification when the campaign has review exceptions.
 * Kept out of the result fingerprint: the same result certified again is the same certificate.
 */
async function acceptanceOf(ctx: Pick<IssueContext, 'manager' | 'config' | 'actor'>, campaignId: string) {
  const c = (await ctx.manager.getRepository(CampaignEntity).findOneBy({ id: campaignId })) ?? { acceptedByUserId: null, acceptedBy: null, acceptedAt: null, acceptanceComment: null, acceptanceJustification: null, acceptanceExceptions: [] };
  if (ctx.config.reviewFourEyes && c.acceptedByUserId && c.acceptedByUserId === ctx.actor.userId) {
    throw new Forbidden(`Four-eyes rule: you accepted this campaign (${mailDate(c.acceptedAt ?? new Date())}), so another coordinator must issue its certificate.`);
  }
  return c;
}

async function reviewDecision(ctx: Pick<IssueContext, 'manager' | 'config' | 'actor'>, campaignId: string, body: SnapshotBody, decision: CertifyDecision, previous?: ReviewDecision): Promise<ReviewDecision> {
  const c = await acceptanceOf(ctx, campaignId);
  const exceptions = certificationExceptions(body, ctx.config.reviewMinUptimeFraction, await closureExceptions(ctx.manager, ctx.actor, campaignId));
  const earlier = previous?.justifications.find((j) => j.stage === 'certification');
  const text = decision.justification ?? (exceptions.length ? earlier?.text : undefined);
  if (exceptions.length && !text) {
    throw new Invalid(`Certifying needs a written justification: ${exceptions.map((x) => x.text).join(' ')}`, [
      { path: 'body.justification', message: `required: ${exceptions.map((x) => x.code).join(', ')}` },
    ]);
  }
  const justifications: ReviewDecision['justifications'] = [];
  if (c.acceptanceJustification) justifications.push({ stage: 'acceptance', by: c.acceptedBy ?? 'the reviewer', text: c.acceptanceJustification });
  if (exceptions.length && text) justifications.push({ stage: 'certification', by: decision.justification ? ctx.actor.displayName : (earlier?.by ?? ctx.actor.displayName), text });
  return {
    acceptedBy: c.acceptedBy,
    acceptanceComment: c.acceptanceComment,
    certifiedBy: ctx.actor.displayName,
    certificationComment: decision.comment,
    exceptions: [...new Set([...(c.acceptanceExceptions ?? []), ...exceptions.map((x) => x.text)])],
    justifications,
  };
}

async function renderAndSign(ctx: IssueContext, body: SnapshotBody, number: string, revision: number, issuedAt: Date, review: ReviewDecision) {
  const institute = await coordinatingInstitute(ctx.manager);
  const issuingInstitute = institute?.name ?? 'Coordinating institute';
  const snapshot: CertificateSnapshot = {
    ...body,
    certificateNumber: number,
    revision,
    issueDate: issuedAt.toISOString(),
    issuingInstitute,
    auditChainHead: await auditChainHead(ctx.manager),
    signer: { name: ctx.actor.displayName, role: `Coordinator, ${issuingInstitute}` },
    verificationUrl: verificationUrlFor(ctx.config, number),
    review,
  };
  await ctx.onStage?.('rendering the PDF', 0.3);
  const unsigned = await renderCertificatePdf(snapshot);
  await ctx.onStage?.('time-stamping and signing', 0.55);
  const { pdf, signingKeySerial } = await signCertificate(ctx.manager, ctx.config, unsigned, {
    reason: revision > 1 ? `Certificate ${number} (revision ${revision})` : `Certificate ${number}`,
    location: institute?.city ?? issuingInstitute,
    name: ctx.actor.displayName,
    signingTime: issuedAt,
  });
  return { snapshot, pdf, pdfSha256: sha256Hex(pdf), signingKeySerial };
}

/**
 * Signs at PAdES B-LTA with the current signing key: the CAdES signature with its time-stamp, then a DSS
 * with the chain, a CRL published for the occasion and the TSA's CRLs, then the document time-stamp.
 */
export async function signCertificate(manager: EntityManager, config: AppConfig, unsigned: Buffer, options: PadesOptions) {
  const subject = await instituteSubject(manager);
  const key = await currentSigningKey(manager, config, subject);
  const tsaRoots = await trustedTsaRoots(config);
  const pdf = await signPades(unsigned, {
    signer: { keyPem: key.keyPem, certificate: key.certDer, chain: key.chainDer },
    tsaUrl: config.tsaUrl,
    validationData: async (tsaCertificates) => {
      const crl = await publishCrl(manager, config, subject);
      const own = crl ? [crl.der] : await Promise.all(crlUrlsOf(parseCertificate(key.certDer)).map((u) => fetchCrl(u)));
      const tsaCrlUrls = [...new Set(tsaCertificates.flatMap((c) => crlUrlsOf(parseCertificate(c))))];
      const tsaCrls = await Promise.all(tsaCrlUrls.map((u) => fetchCrl(u)));
      return { certificates: [key.certDer, ...key.chainDer, ...tsaCertificates, ...tsaRoots], crls: [...own, ...tsaCrls] };
    },
  }, options);
  return { pdf, signingKeySerial: key.serialHex };
}

/** The operators of both clocks' institutes and the coordinator mailbox. */
async function participantAddresses(manager: EntityManager, config: AppConfig, row: Pick<CertificateRow, 'instituteAId' | 'instituteBId'>): Promise<string[]> {
  return [...new Set([...(await labAddresses(manager, [row.instituteAId, row.instituteBId])), config.coordinatorMail])];
}

export async function notify(manager: EntityManager, config: AppConfig, row: Pick<CertificateRow, 'instituteAId' | 'instituteBId'> & { extraInstituteIds?: string[] }, subject: string, text: string) {
  const extra = row.extraInstituteIds?.length ? await labAddresses(manager, row.extraInstituteIds) : [];
  for (const to of [...new Set([...(await participantAddresses(manager, config, row)), ...extra])]) {
    await enqueueMail(manager, { to, subject, text });
  }
}

export type IssueOutcome = { created: boolean; row: CertificateRow };

export async function issueCertificate(ctx: IssueContext, campaignId: string, decision: CertifyDecision): Promise<IssueOutcome> {
  const { manager, actor } = ctx;
  await lockCampaign(manager, campaignId);
  const issuedAt = ctx.now ?? new Date();
  const source = await ctx.loadSource(manager, campaignId, actor, issuedAt);
  const fingerprint = fingerprintOf(source);
  const repo = manager.getRepository(CertificateEntity);
  const current = await repo.findOneBy({ campaignId, state: 'valid' });
  if (current) {
    if (current.resultFingerprint === fingerprint) return { created: false, row: current };
    throw new Conflict(`The campaign changed since certificate ${current.number} was issued; reissue that certificate instead.`, { number: current.number });
  }
  if (source.campaignState !== 'accepted' && source.campaignState !== 'certified') {
    throw new Conflict(`Only an accepted campaign can be certified; this one is '${source.campaignState}'.`, { state: source.campaignState });
  }
  const review = await reviewDecision(ctx, campaignId, source.body, decision);
  const year = issuedAt.getUTCFullYear();
  const serial = await nextSerial(manager, year);
  const number = formatCertificateNumber(year, serial, 1);
  const { snapshot, pdf, pdfSha256, signingKeySerial } = await renderAndSign(ctx, source.body, number, 1, issuedAt, review);
  await faultPoint('certificate-issue'); // test-only kill point: serial taken, PDF signed, nothing inserted yet
  await ctx.onStage?.('storing the certificate', 0.9);
  const row = await insertRow(manager, actor, campaignSubject(source), fingerprint, { number, year, serial, revision: 1, issuedAt, snapshot, pdf, pdfSha256, signingKeySerial });
  await recordAudit(manager, actor, {
    action: 'certificate.issued', entityType: 'certificate', entityId: number,
    details: { campaignId, resultId: source.resultId, pdfSha256, auditChainHead: snapshot.auditChainHead, comment: review.certificationComment, exceptions: review.exceptions, justifications: review.justifications },
  });
  if (source.campaignState !== 'certified') await ctx.markCertified(manager, campaignId, actor);
  await notify(manager, ctx.config, row, `Campaign certified: ${source.campaignLabel} (certificate ${number})`,
    `The campaign "${source.campaignLabel}" is certified: certificate ${number} was issued by ${actor.displayName} on ${mailDate(issuedAt)}.\n\n` +
      `Comment: ${review.certificationComment}\n` +
      (review.justifications.length ? `Certified despite: ${review.exceptions.join(' ')}\n${review.justifications.map((j) => `Justification (${j.stage}, ${j.by}): ${j.text}`).join('\n')}\n` : '') +
      `\nSHA-256 of the signed file: ${pdfSha256}\nVerify it at ${verificationUrlFor(ctx.config, number)}\n`);
  return { created: true, row };
}

/** What the registry row says the certificate is about: a campaign, or a calibration chain. */
export type CertificateSubject = {
  kind: 'campaign' | 'chain'; campaignId: string | null; chainId: string | null; resultId: string | null;
  instituteAId: string | null; instituteBId: string | null; campaignLabel: string;
};

const campaignSubject = (source: CertificateSource): CertificateSubject => ({
  kind: 'campaign', campaignId: source.campaignId, chainId: null, resultId: source.resultId,
  instituteAId: source.instituteAId, instituteBId: source.instituteBId, campaignLabel: source.campaignLabel,
});

export async function insertRow(
  manager: EntityManager, actor: Actor, source: CertificateSubject, fingerprint: string,
  v: { id?: string; number: string; year: number; serial: number; revision: number; issuedAt: Date; snapshot: CertificateSnapshot; pdf: Buffer; pdfSha256: string; signingKeySerial: string },
): Promise<CertificateRow> {
  const repo = manager.getRepository(CertificateEntity);
  const id = v.id ?? randomUUID();
  await repo.insert({
    id, number: v.number, year: v.year, serial: v.serial, revision: v.revision,
    kind: source.kind, campaignId: source.campaignId, chainId: source.chainId, resultId: source.resultId, resultFingerprint: fingerprint,
    instituteAId: source.instituteAId, instituteBId: source.instituteBId, campaignLabel: source.campaignLabel,
    state: 'valid', issuedBy: actor.userId, issuedByLabel: actorLabel(actor), issuedAt: v.issuedAt,
    pdf: v.pdf, pdfSha256: v.pdfSha256, pdfBytes: v.pdf.length, snapshot: v.snapshot as never,
  });
  await manager.query(`UPDATE certificate SET signing_key_serial = $1 WHERE id = $2`, [v.signingKeySerial, id]);
  return repo.findOneByOrFail({ id });
}

/** The campaign of a campaign certificate (a chain certificate is reissued by chain-issue.ts). */
function campaignOf(row: CertificateRow): string {
  if (row.kind !== 'campaign' || !row.campaignId) throw new Conflict(`Certificate ${row.number} is a chain certificate; it is reissued from its chain.`);
  return row.campaignId;
}

export async function lockByNumber(manager: EntityManager, number: string): Promise<CertificateRow> {
  const row = await manager.getRepository(CertificateEntity).createQueryBuilder('c').setLock('pessimistic_write').where('c.number = :number', { number }).getOne();
  if (!row) throw new NotFound(`Certificate ${number}`);
  return row;
}

export async function newestRevisionNumber(manager: EntityManager, year: number, serial: number): Promise<string> {
  const newest = await manager.getRepository(CertificateEntity).findOne({ where: { year, serial }, order: { revision: 'DESC' } });
  return newest!.number;
}

export async function reissueCertificate(ctx: IssueContext, number: string, reason: string, justification?: string): Promise<CertificateRow> {
  const { manager, actor } = ctx;
  const previous = await lockByNumber(manager, number);
  if (previous.state === 'superseded') {
    throw new Conflict(`Certificate ${number} was already replaced; reissue the newest revision ${await newestRevisionNumber(manager, previous.year, previous.serial)}.`);
  }
  if (previous.state === 'revoked') throw new Conflict(`Certificate ${number} was withdrawn and cannot be reissued; issue a new certificate for the campaign.`);
  const campaignId = campaignOf(previous);
  await lockCampaign(manager, campaignId);
  const issuedAt = ctx.now ?? new Date();
  const source = await ctx.loadSource(manager, campaignId, actor, issuedAt);
  if (source.campaignState !== 'accepted' && source.campaignState !== 'certified') {
    throw new Conflict(`The campaign is '${source.campaignState}'; a certificate can be reissued only for an accepted or certified campaign.`, { state: source.campaignState });
  }
  const revision = previous.revision + 1;
  const newNumber = formatCertificateNumber(previous.year, previous.serial, revision);
  const [prevSnapshot] = await manager.query(`SELECT snapshot->'review' AS review FROM certificate WHERE id = $1`, [previous.id]) as { review: ReviewDecision | null }[];
  const review = await reviewDecision(ctx, campaignId, source.body, { comment: reason, justification }, prevSnapshot?.review ?? undefined);
  const { snapshot, pdf, pdfSha256, signingKeySerial } = await renderAndSign(ctx, source.body, newNumber, revision, issuedAt, review);
  await ctx.onStage?.('storing the certificate', 0.9);
  const id = randomUUID();
  // The pointer's foreign key is deferred, so the old row can step aside before the new valid one arrives.
  await manager.getRepository(CertificateEntity).update({ id: previous.id }, { state: 'superseded', supersededBy: id, supersededAt: issuedAt });
  const row = await insertRow(manager, actor, campaignSubject(source), fingerprintOf(source), { id, number: newNumber, year: previous.year, serial: previous.serial, revision, issuedAt, snapshot, pdf, pdfSha256, signingKeySerial });
  await recordAudit(manager, actor, { action: 'certificate.superseded', entityType: 'certificate', entityId: number, details: { campaignId: campaignId, supersededBy: newNumber, reason } });
  await recordAudit(manager, actor, {
    action: 'certificate.reissued', entityType: 'certificate', entityId: newNumber,
    details: { campaignId: campaignId, supersedes: number, reason, resultId: source.resultId, pdfSha256, auditChainHead: snapshot.auditChainHead },
  });
  if (source.campaignState !== 'certified') await ctx.markCertified(manager, campaignId, actor);
  await notify(manager, ctx.config, row, `Certificate ${number} replaced by ${newNumber}`,
    `Certificate ${number} for the campaign "${source.campaignLabel}" has been replaced by revision ${revision}, ${newNumber}, issued by ${actor.displayName} on ${mailDate(issuedAt)}.\n\n` +
      `What was corrected: ${reason}\n\nThe earlier file no longer stands on its own; use ${newNumber}.\n` +
      `SHA-256 of the new signed file: ${pdfSha256}\nVerify it at ${verificationUrlFor(ctx.config, newNumber)}\n`);
  return row;
}

/**
 * The checks of an issue made when it is asked for (the HTTP request), before any work: the campaign is visible,
 * accepted (or certified with an unchanged result), and the review-desk rules hold (comment, justification when the
 * campaign has exceptions, four-eyes). Writes nothing; the job repeats every check when it issues.
 * Returns the number of the valid certificate that already covers the same result, if any.
 */
export async function precheckIssue(
  ctx: Omit<IssueContext, 'markCertified' | 'loadSource'> & { loadSource: (...a: Parameters<LoadSource>) => Promise<CertificateSource | null> },
  campaignId: string, decision: CertifyDecision,
): Promise<{ existingNumber: string | null; resultPending: boolean }> {
  const source = await ctx.loadSource(ctx.manager, campaignId, ctx.actor, ctx.now ?? new Date());
  if (!source) {
    // No stored result for the current inputs yet (the worker computes it first): the rules that need the result
    // (the justification of its exceptions) are checked by the job, which fails the request naming them.
    const campaign = await ctx.manager.getRepository(CampaignEntity).findOneBy({ id: campaignId });
    if (!campaign) throw new NotFound('Campaign');
    if (campaign.state !== 'accepted') throw new Conflict(`Only an accepted campaign can be certified; this one is '${campaign.state}'.`, { state: campaign.state });
    await acceptanceOf(ctx, campaignId);
    return { existingNumber: null, resultPending: true };
  }
  const current = await ctx.manager.getRepository(CertificateEntity).findOneBy({ campaignId, state: 'valid' });
  if (current) {
    if (current.resultFingerprint === fingerprintOf(source)) return { existingNumber: current.number, resultPending: false };
    throw new Conflict(`The campaign changed since certificate ${current.number} was issued; reissue that certificate instead.`, { number: current.number });
  }
  if (source.campaignState !== 'accepted' && source.campaignState !== 'certified') {
    throw new Conflict(`Only an accepted campaign can be certified; this one is '${source.campaignState}'.`, { state: source.campaignState });
  }
  await reviewDecision(ctx, campaignId, source.body, decision);
  return { existingNumber: null, resultPending: false };
}

/** The reissue's checks at request time (see precheckIssue); returns the campaign of the certificate. */
export async function precheckReissue(ctx: Omit<IssueContext, 'markCertified'>, number: string, reason: string, justification?: string): Promise<{ campaignId: string }> {
  const previous = await ctx.manager.getRepository(CertificateEntity).findOneBy({ number });
  if (!previous) throw new NotFound(`Certificate ${number}`);
  if (previous.state === 'superseded') {
    throw new Conflict(`Certificate ${number} was already replaced; reissue the newest revision ${await newestRevisionNumber(ctx.manager, previous.year, previous.serial)}.`);
  }
  if (previous.state === 'revoked') throw new Conflict(`Certificate ${number} was withdrawn and cannot be reissued; issue a new certificate for the campaign.`);
  const campaignId = campaignOf(previous);
  const source = await ctx.loadSource(ctx.manager, campaignId, ctx.actor, ctx.now ?? new Date());
  if (source.campaignState !== 'accepted' && source.campaignState !== 'certified') {
    throw new Conflict(`The campaign is '${source.campaignState}'; a certificate can be reissued only for an accepted or certified campaign.`, { state: source.campaignState });
  }
  const [prevSnapshot] = await ctx.manager.query(`SELECT snapshot->'review' AS review FROM certificate WHERE id = $1`, [previous.id]) as { review: ReviewDecision | null }[];
  await reviewDecision(ctx, campaignId, source.body, { comment: reason, justification }, prevSnapshot?.review ?? undefined);
  return { campaignId: campaignId };
}

export async function revokeCertificate(ctx: Pick<IssueContext, 'manager' | 'config' | 'actor' | 'now'>, number: string, reason: string): Promise<CertificateRow> {
  const { manager, actor } = ctx;
  const row = await lockByNumber(manager, number);
  if (row.state === 'revoked') throw new Conflict(`Certificate ${number} is already withdrawn.`);
  if (row.state === 'superseded') {
    throw new Conflict(`Certificate ${number} was replaced; withdraw the newest revision ${await newestRevisionNumber(manager, row.year, row.serial)} instead.`);
  }
  const revokedAt = ctx.now ?? new Date();
  await manager.getRepository(CertificateEntity).update({ id: row.id }, { state: 'revoked', revokedAt, revokedBy: actor.userId, revocationReason: reason });
  await recordAudit(manager, actor, { action: 'certificate.revoked', entityType: 'certificate', entityId: number, details: { campaignId: row.campaignId, chainId: row.chainId, reason } });
  const fresh = await manager.getRepository(CertificateEntity).findOneByOrFail({ id: row.id });
  await notify(manager, ctx.config, fresh, `Certificate ${number} withdrawn`,
    `Certificate ${number} for the campaign "${row.campaignLabel}" was withdrawn on ${mailDate(revokedAt)} by ${actor.displayName}.\n\n` +
      `Reason: ${reason}\n\nThe file must no longer be relied on. Anyone can check its state at ${verificationUrlFor(ctx.config, number)}\n`);
  return fresh;
}

export async function instituteNames(manager: EntityManager): Promise<Map<string, { id: string; code: string; name: string }>> {
  const all = await manager.getRepository(InstituteEntity).find();
  return new Map(all.map((i) => [i.id, { id: i.id, code: i.code, name: i.name }]));
}
