import { randomUUID } from 'node:crypto';
import type { DataSource, EntityManager } from 'typeorm';
import type { CertificateRequestProgress } from '../../shared/jobs';
import { JOB_POLL_SECONDS } from '../../shared/jobs';
import { recordAudit } from '../audit/audit.service';
import type { Actor } from '../auth/actor';
import { authorize } from '../auth/permissions';
import type { AppConfig } from '../config';
import { AppError, Conflict, NotFound } from '../http/errors';
import { progressWriter, readProgress, writeProgress } from '../jobs/progress';
import { CERTIFICATE_QUEUE, queueFor, type CertificateJob } from '../jobs/queue';
import { findActorByUserId } from '../users/users.service';
import { loadCertificateSource, loadStoredCertificateSource, markCertified } from './certificate-source';
import { issueCertificate, precheckIssue, precheckReissue, reissueCertificate, type IssueContext } from './issue';
import { loadStoredChainCertificateSource } from './chain-certificate-source';
import { issueChainCertificate, precheckChainIssue, precheckChainReissue, reissueChainCertificate } from './chain-issue';

// Certificates are issued by a job. The HTTP request checks everything a person can get wrong (the campaign's
// state, the comment, the justification, the four-eyes rule), records the request and puts the job on the queue
// in one transaction, and answers 202 with the progress resource. The worker (runCertificateJob) renders,
// time-stamps, signs and stores the certificate and marks the request done in one transaction that holds the
// request row's lock: a retry after a killed worker (whose transaction PostgreSQL rolled back) finds the request
// still open and issues it once; a duplicate delivery finds it done and does nothing.

export type CertificateRequestRow = {
  id: string; kind: 'issue' | 'reissue'; campaign_id: string | null; chain_id: string | null; previous_number: string | null; comment: string; justification: string | null;
  requested_by: string; requested_at: Date; state: 'queued' | 'running' | 'done' | 'failed'; job_id: string | null; certificate_id: string | null;
  created: boolean | null; error: string | null;
};

/** At request time the checks read the stored result; computing is the worker's. */
const readOnlySource = (manager: EntityManager, campaignId: string) => loadStoredCertificateSource(manager, campaignId);

/** A reissue needs the campaign's current result stored (the results page shows its progress while it computes). */
function loadCertificateSourceRefusingToCompute(campaignId: string): never {
  throw new Conflict('The campaign’s result for its current inputs is not computed yet; a worker computes it (the results page shows its progress). Reissue when it is there.', { campaignId });
}

export const progressUrlOf = (id: string) => `/api/v1/certificate-requests/${id}/progress`;

/** What a request is for: a campaign's certificate or a calibration chain's. */
type Subject = { campaignId: string; chainId?: undefined } | { chainId: string; campaignId?: undefined };

async function openRequestFor(manager: EntityManager, subject: Subject): Promise<CertificateRequestRow | null> {
  const rows: CertificateRequestRow[] = subject.chainId
    ? await manager.query(`SELECT * FROM certificate_request WHERE chain_id = $1 AND state IN ('queued', 'running')`, [subject.chainId])
    : await manager.query(`SELECT * FROM certificate_request WHERE campaign_id = $1 AND state IN ('queued', 'running')`, [subject.campaignId]);
  return rows[0] ?? null;
}

async function toProgress(manager: Pick<EntityManager, 'query'>, row: CertificateRequestRow): Promise<CertificateRequestProgress> {
  const p = await readProgress(manager, 'certificate-issue', row.id);
  const [cert]: { number: string }[] = row.certificate_id ? await manager.query('SELECT number FROM certificate WHERE id = $1', [row.certificate_id]) : [];
  const open = row.state === 'queued' || row.state === 'running';
  return {
    id: row.id, kind: row.kind, campaignId: row.campaign_id, chainId: row.chain_id, previousNumber: row.previous_number, requestedAt: row.requested_at.toISOString(),
    state: row.state,
    stage: row.state === 'done' ? 'finished' : row.state === 'failed' ? 'failed' : (p?.stage ?? 'waiting for a worker'),
    fraction: row.state === 'done' ? 1 : (p?.fraction ?? 0),
    updatedAt: p?.updated_at.toISOString() ?? null,
    error: row.error,
    retryAfterSeconds: open ? JOB_POLL_SECONDS : null,
    certificateNumber: cert?.number ?? null,
    created: row.created,
  };
}

export function createCertificateRequests(dataSource: DataSource, config: AppConfig) {
  async function record(manager: EntityManager, actor: Actor, v: Subject & { kind: 'issue' | 'reissue'; previousNumber: string | null; comment: string; justification: string | undefined; resultPending?: boolean }) {
    // One open request per campaign (or chain): asking again while it is open answers with that request (idempotent POST).
    await manager.query('SELECT pg_advisory_xact_lock(hashtext($1))', [`certificate-request:${v.chainId ?? v.campaignId}`]);
    const open = await openRequestFor(manager, v);
    if (open) return { request: await toProgress(manager, open), progressUrl: progressUrlOf(open.id) };
    const id = randomUUID();
    const boss = await queueFor(config.databaseUrl);
    const jobId = await boss.send(CERTIFICATE_QUEUE, { requestId: id } satisfies CertificateJob, {
      db: { executeSql: async (text: string, values: unknown[]) => ({ rows: (await manager.query(text, values)) as unknown[] }) },
    });
    await manager.query(
      `INSERT INTO certificate_request (id, kind, campaign_id, chain_id, previous_number, comment, justification, requested_by, state, job_id)
       VALUES ($1, $2, $3, $4, $5, $6, $7, $8, 'queued', $9)`,
      [id, v.kind, v.campaignId ?? null, v.chainId ?? null, v.previousNumber, v.comment, v.justification ?? null, actor.userId, jobId],
    );
    await writeProgress(manager, 'certificate-issue', id, 'waiting for a worker', 0);
    await recordAudit(manager, actor, {
      action: v.kind === 'issue' ? 'certificate.requested' : 'certificate.reissue-requested',
      entityType: v.chainId ? 'calibration_chain' : 'campaign', entityId: (v.chainId ?? v.campaignId)!,
      details: { requestId: id, previousNumber: v.previousNumber, comment: v.comment, justification: v.justification ?? null, resultPending: v.resultPending ?? false },
    });
    const [row]: CertificateRequestRow[] = await manager.query('SELECT * FROM certificate_request WHERE id = $1', [id]);
    return { request: await toProgress(manager, row), progressUrl: progressUrlOf(id) };
  }

  return {
    /** POST …/campaigns/:id/certificates: checks, records and queues (202). */
    async requestIssue(actor: Actor, campaignId: string, decision: { comment: string; justification?: string }) {
      authorize(actor, 'certificates:issue');
      return dataSource.transaction(async (manager) => {
        const check = await precheckIssue({ manager, config, actor, loadSource: readOnlySource }, campaignId, decision);
        return record(manager, actor, { kind: 'issue', campaignId, previousNumber: null, comment: decision.comment, justification: decision.justification, resultPending: check.resultPending });
      });
    },

    /** POST …/chains/:id/certificates: the same for a calibration chain (202). */
    async requestChainIssue(actor: Actor, chainId: string, decision: { comment: string; justification?: string }) {
      authorize(actor, 'certificates:issue');
      return dataSource.transaction(async (manager) => {
        const check = await precheckChainIssue({ manager, config, actor, loadStored: loadStoredChainCertificateSource }, chainId, decision);
        return record(manager, actor, { kind: 'issue', chainId, previousNumber: null, comment: decision.comment, justification: decision.justification, resultPending: check.resultPending });
      });
    },

    /** POST …/certificates/:number/reissue: checks, records and queues (202). */
    async requestReissue(actor: Actor, number: string, reason: string, justification?: string) {
      authorize(actor, 'certificates:issue');
      return dataSource.transaction(async (manager) => {
        const [kind]: { kind: string }[] = await manager.query('SELECT kind FROM certificate WHERE number = $1', [number]);
        if (kind?.kind === 'chain') {
          const { chainId } = await precheckChainReissue({ manager, config, actor, loadStored: loadStoredChainCertificateSource }, number, reason, justification);
          return record(manager, actor, { kind: 'reissue', chainId, previousNumber: number, comment: reason, justification });
        }
        const { campaignId } = await precheckReissue({ manager, config, actor, loadSource: async (m, id) => (await readOnlySource(m, id)) ?? loadCertificateSourceRefusingToCompute(id) }, number, reason, justification);
        return record(manager, actor, { kind: 'reissue', campaignId, previousNumber: number, comment: reason, justification });
      });
    },

    /** GET …/certificate-requests/:id/progress (reads only). */
    async progress(actor: Actor, id: string): Promise<CertificateRequestProgress> {
      authorize(actor, 'certificates:issue');
      const [row]: CertificateRequestRow[] = await dataSource.query('SELECT * FROM certificate_request WHERE id = $1', [id]);
      if (!row) throw new NotFound('Certificate request');
      return toProgress(dataSource, row);
    },
  };
}

/**
 * Carries out one request inside `manager`'s transaction: locks the request row, issues or reissues, marks it done.
 * Returns false when the request was already finished (a duplicate delivery). Used by the job and by the demo seed.
 */
export async function carryOutCertificateRequest(
  manager: EntityManager, config: AppConfig, requestId: string, opts: { actor?: Actor; onStage?: IssueContext['onStage'] } = {},
): Promise<boolean> {
  const [row]: CertificateRequestRow[] = await manager.query('SELECT * FROM certificate_request WHERE id = $1 FOR UPDATE', [requestId]);
  if (!row) throw new NotFound('Certificate request');
  if (row.state === 'done' || row.state === 'failed') return false;
  const actor = opts.actor ?? (await findActorByUserId(manager.connection, row.requested_by));
  if (!actor) throw new NotFound('The person who asked for the certificate');
  const ctx: IssueContext = { manager, config, actor, loadSource: loadCertificateSource, markCertified, onStage: opts.onStage };
  let certificateId: string;
  let created = true;
  if (row.chain_id) {
    const chainCtx = { manager, config, actor, onStage: opts.onStage };
    if (row.kind === 'issue') {
      const out = await issueChainCertificate(chainCtx, row.chain_id, { comment: row.comment, justification: row.justification ?? undefined });
      certificateId = out.row.id;
      created = out.created;
    } else {
      certificateId = (await reissueChainCertificate(chainCtx, row.previous_number!, row.comment, row.justification ?? undefined)).id;
    }
  } else if (row.kind === 'issue') {
    const out = await issueCertificate(ctx, row.campaign_id!, { comment: row.comment, justification: row.justification ?? undefined });
    certificateId = out.row.id;
    created = out.created;
  } else {
    certificateId = (await reissueCertificate(ctx, row.previous_number!, row.comment, row.justification ?? undefined)).id;
  }
  await manager.query(`UPDATE certificate_request SET state = 'done', finished_at = now(), certificate_id = $2, created = $3, error = NULL WHERE id = $1`, [requestId, certificateId, created]);
  return true;
}

/**
 * Asks for and carries out an issue in the caller's transaction, without a queue: the demo seed (which runs before
 * any worker) uses it, so its certificate has a request row like every other.
 */
export async function issueInline(manager: EntityManager, config: AppConfig, actor: Actor, campaignId: string, decision: { comment: string; justification?: string }): Promise<string> {
  await precheckIssue({ manager, config, actor, loadSource: loadCertificateSource }, campaignId, decision);
  const id = randomUUID();
  await manager.query(
    `INSERT INTO certificate_request (id, kind, campaign_id, comment, justification, requested_by, state, started_at) VALUES ($1, 'issue', $2, $3, $4, $5, 'running', now())`,
    [id, campaignId, decision.comment, decision.justification ?? null, actor.userId],
  );
  await carryOutCertificateRequest(manager, config, id, { actor });
  await writeProgress(manager, 'certificate-issue', id, 'finished', 1);
  return id;
}

/** As issueInline, for a calibration chain (the demo seed's chain certificate). */
export async function issueChainInline(manager: EntityManager, config: AppConfig, actor: Actor, chainId: string, decision: { comment: string; justification?: string }): Promise<string> {
  await precheckChainIssue({ manager, config, actor, loadStored: loadStoredChainCertificateSource }, chainId, decision);
  const id = randomUUID();
  await manager.query(
    `INSERT INTO certificate_request (id, kind, chain_id, comment, justification, requested_by, state, started_at) VALUES ($1, 'issue', $2, $3, $4, $5, 'running', now())`,
    [id, chainId, decision.comment, decision.justification ?? null, actor.userId],
  );
  await carryOutCertificateRequest(manager, config, id, { actor });
  await writeProgress(manager, 'certificate-issue', id, 'finished', 1);
  return id;
}

/** The worker's side: one 'certificate-issue' job. */
export async function runCertificateJob(dataSource: DataSource, config: AppConfig, job: CertificateJob): Promise<'issued' | 'already-done'> {
  const stage = progressWriter(dataSource, 'certificate-issue', job.requestId);
  const [open]: { state: string }[] = await dataSource.query(
    `UPDATE certificate_request SET state = 'running', started_at = coalesce(started_at, now()) WHERE id = $1 AND state IN ('queued', 'running') RETURNING state`, [job.requestId]);
  if (!open) return 'already-done'; // finished (or gone) already: a duplicate delivery changes nothing
  await stage('checking the campaign and its result', 0.1);
  try {
    const did = await dataSource.transaction((m) => carryOutCertificateRequest(m, config, job.requestId, { onStage: stage }));
    if (did) await stage('finished', 1);
    return did ? 'issued' : 'already-done';
  } catch (e) {
    // A rule broken since the request (the campaign changed, was returned, the key is missing) fails for good.
    const final = e instanceof AppError;
    const message = final ? e.message : `issuing failed (${(e as Error).message}); it is tried again automatically`;
    if (final) await dataSource.query(`UPDATE certificate_request SET state = 'failed', finished_at = now(), error = $2 WHERE id = $1 AND state IN ('queued', 'running')`, [job.requestId, message]);
    await writeProgress(dataSource, 'certificate-issue', job.requestId, final ? 'failed' : 'waiting to be retried', 0, message).catch(() => undefined);
    if (!final) throw e;
    return 'already-done';
  }
}
