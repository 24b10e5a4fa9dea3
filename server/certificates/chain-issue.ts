import { createHash, randomUUID } from 'node:crypto';
import type { EntityManager } from 'typeorm';
import { formatCertificateNumber, type ChainCertificateSnapshot, type ReviewDecision } from '../../shared/certificates';
import { recordAudit } from '../audit/audit.service';
import type { Actor } from '../auth/actor';
import type { AppConfig } from '../config';
import { CertificateEntity, type CertificateRow } from '../db/entities/certificates.entities';
import { faultPoint } from '../dev/fault-point';
import { Conflict, Forbidden, Invalid, NotFound } from '../http/errors';
import { mailDate } from '../mail/mail-text';
import { chainParts, loadChainCertificateSource, readableChain, requireChainCertifiable, type ChainCertificateSource } from './chain-certificate-source';
import { coordinatingInstitute } from './institute-identity';
import {
  auditChainHead, canonicalJson, insertRow, lockByNumber, newestRevisionNumber, nextSerial, notify, sha256Hex, signCertificate,
  verificationUrlFor, type CertifyDecision, type IssueOutcome,
} from './issue';
import { renderChainCertificatePdf } from './pdf/render-chain-certificate';

// Issuing and reissuing the certificate of a calibration chain inside the caller's transaction, as for a campaign
// (issue.ts): number, snapshot, render, sign, store, audit and mail commit together or not at all. The rules mirror the
// campaign's: only when every campaign the chain uses is accepted or certified; the four-eyes rule (whoever accepted one
// of its campaigns does not certify the chain); a written justification when the chain has a review exception (its
// before/after calibrations disagree); one valid certificate per chain; an unchanged chain gives the same certificate.

export interface ChainIssueContext {
  manager: EntityManager;
  config: AppConfig;
  actor: Actor;
  now?: Date;
  onStage?: (stage: string, fraction: number) => Promise<void>;
}

export const chainFingerprintOf = (source: Pick<ChainCertificateSource, 'body'>) => createHash('sha256').update(canonicalJson({ kind: 'chain', body: source.body })).digest('hex');

async function lockChain(manager: EntityManager, chainId: string): Promise<void> {
  await manager.query(`SELECT pg_advisory_xact_lock(hashtext($1))`, [`certificate-chain:${chainId}`]);
}

/** The review exceptions of a chain, in words (the campaigns' own were settled when each was accepted or certified). */
function chainExceptions(source: Pick<ChainCertificateSource, 'body'>): { code: string; text: string }[] {
  const ba = source.body.beforeAfter;
  return ba && !ba.agreed
    ? [{ code: 'before-after-disagree', text: `The before and after calibrations of the transportable clock disagree (|Eₙ| = ${Math.abs(ba.En).toFixed(2)} > 1).` }]
    : [];
}

/** Four-eyes: whoever accepted one of the chain's campaigns does not certify the chain (when the rule is on). */
function fourEyes(ctx: Pick<ChainIssueContext, 'config' | 'actor'>, source: Pick<ChainCertificateSource, 'campaigns'>): void {
  if (!ctx.config.reviewFourEyes) return;
  const own = chainParts(source.campaigns).map(([, c]) => c).find((c) => c.acceptedByUserId && c.acceptedByUserId === ctx.actor.userId);
  if (own) throw new Forbidden(`Four-eyes rule: you accepted “${own.name}” (${mailDate(own.acceptedAt ?? new Date())}), a campaign of this chain, so another coordinator must certify the chain.`);
}

function chainReviewDecision(ctx: Pick<ChainIssueContext, 'config' | 'actor'>, source: ChainCertificateSource, decision: CertifyDecision, previous?: ReviewDecision): ReviewDecision {
  fourEyes(ctx, source);
  const exceptions = chainExceptions(source);
  const earlier = previous?.justifications.find((j) => j.stage === 'certification');
  const text = decision.justification ?? (exceptions.length ? earlier?.text : undefined);
  if (exceptions.length && !text) {
    throw new Invalid(`Certifying needs a written justification: ${exceptions.map((x) => x.text).join(' ')}`, [
      { path: 'body.justification', message: `required: ${exceptions.map((x) => x.code).join(', ')}` },
    ]);
  }
  const accepted = chainParts(source.campaigns).map(([, c]) => (c.acceptedBy ? `${c.acceptedBy} (${c.name})` : null)).filter((x): x is string => !!x);
  return {
    acceptedBy: accepted.length ? accepted.join('; ') : null,
    acceptanceComment: null,
    certifiedBy: ctx.actor.displayName,
    certificationComment: decision.comment,
    exceptions: exceptions.map((x) => x.text),
    justifications: exceptions.length && text ? [{ stage: 'certification', by: decision.justification ? ctx.actor.displayName : (earlier?.by ?? ctx.actor.displayName), text }] : [],
  };
}

async function renderAndSign(ctx: ChainIssueContext, source: ChainCertificateSource, number: string, revision: number, issuedAt: Date, review: ReviewDecision) {
  const institute = await coordinatingInstitute(ctx.manager);
  const issuingInstitute = institute?.name ?? 'Coordinating institute';
  const snapshot: ChainCertificateSnapshot = {
    ...source.body,
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
  const unsigned = await renderChainCertificatePdf(snapshot);
  await ctx.onStage?.('time-stamping and signing', 0.55);
  const { pdf, signingKeySerial } = await signCertificate(ctx.manager, ctx.config, unsigned, {
    reason: revision > 1 ? `Chain certificate ${number} (revision ${revision})` : `Chain certificate ${number}`,
    location: institute?.city ?? issuingInstitute,
    name: ctx.actor.displayName,
    signingTime: issuedAt,
  });
  return { snapshot, pdf, pdfSha256: sha256Hex(pdf), signingKeySerial };
}

const subjectOf = (source: ChainCertificateSource) => ({
  kind: 'chain' as const, campaignId: null, chainId: source.chainId, resultId: null,
  instituteAId: source.transportableInstituteId, instituteBId: source.referenceInstituteId, campaignLabel: source.chainName,
});

const campaignIdsOf = (source: ChainCertificateSource) => chainParts(source.campaigns).map(([, c]) => c.id);

export async function issueChainCertificate(ctx: ChainIssueContext, chainId: string, decision: CertifyDecision): Promise<IssueOutcome> {
  const { manager, actor } = ctx;
  await lockChain(manager, chainId);
  const issuedAt = ctx.now ?? new Date();
  const source = await loadChainCertificateSource(manager, chainId, actor, issuedAt);
  const fingerprint = chainFingerprintOf(source);
  const repo = manager.getRepository(CertificateEntity);
  const current = await repo.findOneBy({ chainId, state: 'valid' });
  if (current) {
    if (current.resultFingerprint === fingerprint) return { created: false, row: current };
    throw new Conflict(`The chain or its campaigns’ results changed since certificate ${current.number} was issued; reissue that certificate instead.`, { number: current.number });
  }
  const review = chainReviewDecision(ctx, source, decision);
  const year = issuedAt.getUTCFullYear();
  const serial = await nextSerial(manager, year);
  const number = formatCertificateNumber(year, serial, 1);
  const { snapshot, pdf, pdfSha256, signingKeySerial } = await renderAndSign(ctx, source, number, 1, issuedAt, review);
  await faultPoint('certificate-issue');
  await ctx.onStage?.('storing the certificate', 0.9);
  const row = await insertRow(manager, actor, subjectOf(source), fingerprint, { number, year, serial, revision: 1, issuedAt, snapshot: snapshot as never, pdf, pdfSha256, signingKeySerial });
  await recordAudit(manager, actor, {
    action: 'certificate.issued', entityType: 'certificate', entityId: number,
    details: { kind: 'chain', chainId, campaignIds: campaignIdsOf(source), pdfSha256, auditChainHead: snapshot.auditChainHead, comment: review.certificationComment, exceptions: review.exceptions, justifications: review.justifications },
  });
  const d = snapshot.deltaC_m2s2;
  await notify(manager, ctx.config, { ...row, extraInstituteIds: source.instituteIds }, `Chain certified: ${source.chainName} (certificate ${number})`,
    `The calibration chain "${source.chainName}" is certified: certificate ${number} was issued by ${actor.displayName} on ${mailDate(issuedAt)}.\n\n` +
      `ΔC = C(${snapshot.toSite}) − C(${snapshot.fromSite}) = ${d.value.toFixed(3)} m²/s², U = ${d.expandedUncertainty.toFixed(3)} m²/s² (k = ${d.coverageFactor.toFixed(2)}, p = ${(100 * d.coverageProbability).toFixed(2)} %).\n` +
      `Campaigns: ${snapshot.campaigns.map((c) => c.label).join('; ')}\n` +
      `Comment: ${review.certificationComment}\n` +
      (review.justifications.length ? `Certified despite: ${review.exceptions.join(' ')}\n${review.justifications.map((j) => `Justification (${j.stage}, ${j.by}): ${j.text}`).join('\n')}\n` : '') +
      `\nVerify against your national datum authority and your lab's quality procedures before using it for a height datum.\n` +
      `SHA-256 of the signed file: ${pdfSha256}\nVerify it at ${verificationUrlFor(ctx.config, number)}\n`);
  return { created: true, row };
}

export async function reissueChainCertificate(ctx: ChainIssueContext, number: string, reason: string, justification?: string): Promise<CertificateRow> {
  const { manager, actor } = ctx;
  const previous = await lockByNumber(manager, number);
  const chainId = checkReissuable(previous, await newestOf(manager, previous));
  await lockChain(manager, chainId);
  const issuedAt = ctx.now ?? new Date();
  const source = await loadChainCertificateSource(manager, chainId, actor, issuedAt);
  const revision = previous.revision + 1;
  const newNumber = formatCertificateNumber(previous.year, previous.serial, revision);
  const [prev] = await manager.query(`SELECT snapshot->'review' AS review FROM certificate WHERE id = $1`, [previous.id]) as { review: ReviewDecision | null }[];
  const review = chainReviewDecision(ctx, source, { comment: reason, justification }, prev?.review ?? undefined);
  const { snapshot, pdf, pdfSha256, signingKeySerial } = await renderAndSign(ctx, source, newNumber, revision, issuedAt, review);
  await ctx.onStage?.('storing the certificate', 0.9);
  const id = randomUUID();
  await manager.getRepository(CertificateEntity).update({ id: previous.id }, { state: 'superseded', supersededBy: id, supersededAt: issuedAt });
  const row = await insertRow(manager, actor, subjectOf(source), chainFingerprintOf(source), { id, number: newNumber, year: previous.year, serial: previous.serial, revision, issuedAt, snapshot: snapshot as never, pdf, pdfSha256, signingKeySerial });
  await recordAudit(manager, actor, { action: 'certificate.superseded', entityType: 'certificate', entityId: number, details: { kind: 'chain', chainId, supersededBy: newNumber, reason } });
  await recordAudit(manager, actor, {
    action: 'certificate.reissued', entityType: 'certificate', entityId: newNumber,
    details: { kind: 'chain', chainId, campaignIds: campaignIdsOf(source), supersedes: number, reason, pdfSha256, auditChainHead: snapshot.auditChainHead },
  });
  await notify(manager, ctx.config, { ...row, extraInstituteIds: source.instituteIds }, `Certificate ${number} replaced by ${newNumber}`,
    `Certificate ${number} for the calibration chain "${source.chainName}" has been replaced by revision ${revision}, ${newNumber}, issued by ${actor.displayName} on ${mailDate(issuedAt)}.\n\n` +
      `What was corrected: ${reason}\n\nThe earlier file no longer stands on its own; use ${newNumber}.\n` +
      `SHA-256 of the new signed file: ${pdfSha256}\nVerify it at ${verificationUrlFor(ctx.config, newNumber)}\n`);
  return row;
}

async function newestOf(manager: EntityManager, row: CertificateRow): Promise<string> {
  return row.state === 'superseded' ? newestRevisionNumber(manager, row.year, row.serial) : row.number;
}

function checkReissuable(previous: CertificateRow, newest: string): string {
  if (previous.kind !== 'chain' || !previous.chainId) throw new Conflict(`Certificate ${previous.number} is not a chain certificate.`);
  if (previous.state === 'superseded') throw new Conflict(`Certificate ${previous.number} was already replaced; reissue the newest revision ${newest}.`);
  if (previous.state === 'revoked') throw new Conflict(`Certificate ${previous.number} was withdrawn and cannot be reissued; issue a new certificate for the chain.`);
  return previous.chainId;
}

/**
 * The checks of a chain issue when it is asked for (the HTTP request): the chain is visible, every campaign accepted or
 * certified, the four-eyes rule, and — when every campaign's current result is stored — the justification of the
 * chain's exceptions and whether a valid certificate already covers the same chain. Writes nothing.
 */
export async function precheckChainIssue(
  ctx: ChainIssueContext & { loadStored: (m: EntityManager, chainId: string, actor: Actor) => Promise<ChainCertificateSource | null> },
  chainId: string, decision: CertifyDecision,
): Promise<{ existingNumber: string | null; resultPending: boolean }> {
  const source = await ctx.loadStored(ctx.manager, chainId, ctx.actor);
  if (!source) {
    const { cs } = await readableChain(ctx.manager, ctx.actor, chainId);
    requireChainCertifiable(cs);
    fourEyes(ctx, { campaigns: cs });
    return { existingNumber: null, resultPending: true };
  }
  const current = await ctx.manager.getRepository(CertificateEntity).findOneBy({ chainId, state: 'valid' });
  if (current) {
    if (current.resultFingerprint === chainFingerprintOf(source)) return { existingNumber: current.number, resultPending: false };
    throw new Conflict(`The chain or its campaigns’ results changed since certificate ${current.number} was issued; reissue that certificate instead.`, { number: current.number });
  }
  chainReviewDecision(ctx, source, decision);
  return { existingNumber: null, resultPending: false };
}

/** The reissue's checks at request time; returns the chain of the certificate. */
export async function precheckChainReissue(
  ctx: ChainIssueContext & { loadStored: (m: EntityManager, chainId: string, actor: Actor) => Promise<ChainCertificateSource | null> },
  number: string, reason: string, justification?: string,
): Promise<{ chainId: string }> {
  const previous = await ctx.manager.getRepository(CertificateEntity).findOneBy({ number });
  if (!previous) throw new NotFound(`Certificate ${number}`);
  const chainId = checkReissuable(previous, await newestOf(ctx.manager, previous));
  const source = await ctx.loadStored(ctx.manager, chainId, ctx.actor);
  if (!source) throw new Conflict('A campaign of the chain has no result for its current inputs yet; a worker computes it (its results page shows the progress). Reissue when it is there.');
  const [prev] = await ctx.manager.query(`SELECT snapshot->'review' AS review FROM certificate WHERE id = $1`, [previous.id]) as { review: ReviewDecision | null }[];
  chainReviewDecision(ctx, source, { comment: reason, justification }, prev?.review ?? undefined);
  return { chainId };
}
