import type { DataSource, EntityManager } from 'typeorm';
import type { CertificateDetail, CertificateListQuery, CertificateSummary } from '../../shared/certificate-registry';
import { isChainSnapshot, type AnyCertificateSnapshot, type ChainCertificateSnapshot } from '../../shared/certificates';
import { campaignScopeCondition } from '../auth/campaign-scope';
import { canSeeChain, loadChainCampaigns } from '../chains/chain-compute';
import { CalibrationChainEntity } from '../db/entities/registry.entities';
import type { Actor } from '../auth/actor';
import { authorize } from '../auth/permissions';
import type { AppConfig } from '../config';
import { CertificateEntity, type CertificateRow } from '../db/entities/certificates.entities';
import { NotFound } from '../http/errors';
import { instituteNames, revokeCertificate } from './issue';

// The certificate registry as the API sees it: coordinators withdraw (issue and reissue are jobs:
// certificate-requests.ts); everyone with
// 'certificates:read' reads, operators only the certificates of their own institute's clocks.

type Institutes = Awaited<ReturnType<typeof instituteNames>>;

async function numberOf(manager: EntityManager, id: string | null): Promise<string | null> {
  if (!id) return null;
  return (await manager.getRepository(CertificateEntity).findOneBy({ id }))?.number ?? null;
}

export async function toCertificateSummary(manager: EntityManager, row: CertificateRow, institutes?: Institutes): Promise<CertificateSummary> {
  const inst = institutes ?? (await instituteNames(manager));
  return {
    id: row.id,
    number: row.number,
    year: row.year,
    serial: row.serial,
    revision: row.revision,
    kind: row.kind,
    campaignId: row.campaignId,
    chainId: row.chainId,
    campaignLabel: row.campaignLabel,
    instituteA: row.instituteAId ? (inst.get(row.instituteAId) ?? null) : null,
    instituteB: row.instituteBId ? (inst.get(row.instituteBId) ?? null) : null,
    state: row.state,
    issuedAt: row.issuedAt.toISOString(),
    issuedBy: row.issuedByLabel,
    pdfSha256: row.pdfSha256,
    pdfBytes: row.pdfBytes,
    supersededByNumber: await numberOf(manager, row.supersededBy),
    supersededAt: row.supersededAt?.toISOString() ?? null,
    revokedAt: row.revokedAt?.toISOString() ?? null,
    revocationReason: row.revocationReason,
  };
}

async function scopeCheck(manager: EntityManager, actor: Actor, row: CertificateRow): Promise<void> {
  // A chain's certificate is visible to whoever may see the chain (every campaign of it: server/auth/campaign-scope.ts).
  if (row.kind === 'chain') {
    const chain = row.chainId ? await manager.getRepository(CalibrationChainEntity).findOneBy({ id: row.chainId }) : null;
    if (!chain || !canSeeChain(actor, await loadChainCampaigns(manager, chain))) throw new NotFound('Certificate');
    return;
  }
  // As for campaigns (docs/decisions/0004-campaign-visibility.md): another institute's certificate does not exist
  // for lab staff — numbers are sequential, so a 403 would confirm each one.
  if (actor.role === 'operator' && actor.instituteId !== row.instituteAId && actor.instituteId !== row.instituteBId) {
    throw new NotFound('Certificate');
  }
}

/**
 * The list's scoping as SQL, the same rule as scopeCheck: campaign certificates by the clocks' institutes (lab staff),
 * chain certificates only when no campaign of the chain is hidden from the caller by the campaign rule.
 */
function scopeCondition(actor: Actor): { sql: string; params: Record<string, unknown> } {
  const scope = campaignScopeCondition(actor, { state: 'sc.state', institute: 'sc.institute_id', partnerInstitute: 'scb.institute_id' });
  const chainVisible = `NOT EXISTS (SELECT 1 FROM calibration_chain sch
      JOIN campaign sc ON sc.id IN (sch.remote_campaign_id, sch.before_campaign_id, sch.after_campaign_id)
      LEFT JOIN clock scb ON scb.id = sc.clock_b_id
      WHERE sch.id = c.chain_id AND NOT coalesce(${scope.sql}, false))`;
  const campaignVisible = actor.role === 'operator' ? '(c.institute_a_id = :own OR c.institute_b_id = :own)' : 'true';
  return {
    sql: `((c.kind = 'campaign' AND ${campaignVisible}) OR (c.kind = 'chain' AND ${chainVisible}))`,
    params: { ...scope.params, ...(actor.role === 'operator' ? { own: actor.instituteId ?? '00000000-0000-0000-0000-000000000000' } : {}) },
  };
}

/** The detail's figures of a chain certificate: its ΔC, ΔH, the period its campaigns span and the before/after Eₙ. */
const figure = (q: ChainCertificateSnapshot['deltaC_m2s2']) => ({
  value: q.value, expandedUncertainty: q.expandedUncertainty, coverageFactor: q.coverageFactor,
  coverageProbability: q.coverageProbability, effectiveDegreesOfFreedom: q.effectiveDegreesOfFreedom,
});

function chainFigures(s: ChainCertificateSnapshot) {
  const starts = s.campaigns.map((c) => c.period.start).sort();
  const ends = s.campaigns.map((c) => c.period.end).sort();
  return {
    measurementPeriod: { start: starts[0], end: ends[ends.length - 1] },
    deltaC_m2s2: figure(s.deltaC_m2s2),
    deltaH_m: figure(s.deltaH_m),
    En: s.beforeAfter?.En ?? null,
    agreed: s.beforeAfter?.agreed ?? null,
    chain: { fromSite: s.fromSite, toSite: s.toSite, campaigns: s.campaigns.map((c) => ({ id: c.campaignId, label: c.label, role: c.role })) },
  };
}

const sortColumns = new Map<NonNullable<CertificateListQuery['sort']>, string>([
  ['number', 'c.number'],
  ['issuedAt', 'c.issued_at'],
  ['state', 'c.state'],
  ['campaignLabel', 'c.campaign_label'],
]);

function endOfDay(d: string): Date {
  return d.length === 10 ? new Date(Date.parse(`${d}T00:00:00Z`) + 86_400_000) : new Date(d);
}

export function createCertificatesService(dataSource: DataSource, config: AppConfig) {
  async function byNumber(manager: EntityManager, actor: Actor, number: string, extra: ('pdf' | 'snapshot')[] = []) {
    const qb = manager.getRepository(CertificateEntity).createQueryBuilder('c').where('c.number = :number', { number });
    for (const column of extra) qb.addSelect(`c.${column}`);
    const row = await qb.getOne();
    if (!row) throw new NotFound(`Certificate ${number}`);
    await scopeCheck(manager, actor, row);
    return row;
  }

  return {
    async revoke(actor: Actor, number: string, reason: string) {
      authorize(actor, 'certificates:issue');
      return dataSource.transaction(async (manager) => toCertificateSummary(manager, await revokeCertificate({ manager, config, actor }, number, reason)));
    },

    async list(actor: Actor, q: CertificateListQuery) {
      authorize(actor, 'certificates:read');
      const manager = dataSource.manager;
      const qb = manager.getRepository(CertificateEntity).createQueryBuilder('c');
      const scope = scopeCondition(actor);
      qb.andWhere(scope.sql, scope.params);
      if (q.kind) qb.andWhere('c.kind = :kind', { kind: q.kind });
      if (q.chainId) qb.andWhere('c.chain_id = :chain', { chain: q.chainId });
      if (q.state) qb.andWhere('c.state = :state', { state: q.state });
      if (q.instituteId) qb.andWhere('(c.institute_a_id = :inst OR c.institute_b_id = :inst)', { inst: q.instituteId });
      if (q.campaignId) qb.andWhere('c.campaign_id = :campaign', { campaign: q.campaignId });
      if (q.issuedFrom) qb.andWhere('c.issued_at >= :from', { from: new Date(q.issuedFrom) });
      if (q.issuedTo) qb.andWhere('c.issued_at < :to', { to: endOfDay(q.issuedTo) });
      if (q.q) qb.andWhere('(c.number ILIKE :q OR c.campaign_label ILIKE :q OR c.pdf_sha256 ILIKE :q)', { q: `%${q.q}%` });
      qb.orderBy(sortColumns.get(q.sort ?? 'issuedAt') ?? 'c.issued_at', q.order === 'asc' ? 'ASC' : 'DESC').addOrderBy('c.number', 'DESC');
      const [rows, total] = await qb.skip((q.page - 1) * q.pageSize).take(q.pageSize).getManyAndCount();
      const institutes = await instituteNames(manager);
      const items = await Promise.all(rows.map((r) => toCertificateSummary(manager, r, institutes)));
      return { items, total, page: q.page, pageSize: q.pageSize };
    },

    async get(actor: Actor, number: string): Promise<CertificateDetail> {
      authorize(actor, 'certificates:read');
      const manager = dataSource.manager;
      const row = await byNumber(manager, actor, number, ['snapshot']);
      const stored = row.snapshot as unknown as AnyCertificateSnapshot;
      const revisions = await manager.getRepository(CertificateEntity).find({ where: { year: row.year, serial: row.serial }, order: { revision: 'ASC' } });
      const latest = revisions[revisions.length - 1];
      return {
        ...(await toCertificateSummary(manager, row)),
        revisions: revisions.map((r) => ({ number: r.number, revision: r.revision, state: r.state, issuedAt: r.issuedAt.toISOString() })),
        latestNumber: latest.number === row.number ? null : latest.number,
        auditChainHead: stored.auditChainHead,
        ...(isChainSnapshot(stored) ? chainFigures(stored) : {
          measurementPeriod: stored.measurementPeriod,
          deltaC_m2s2: stored.deltaC_m2s2,
          deltaH_m: stored.deltaH_m,
          En: stored.geodeticComparison.En,
          agreed: stored.geodeticComparison.agreed,
          chain: null,
        }),
      };
    },

    async pdf(actor: Actor, number: string) {
      authorize(actor, 'certificates:read');
      const row = await byNumber(dataSource.manager, actor, number, ['pdf']);
      return { number: row.number, pdf: row.pdf, sha256: row.pdfSha256 };
    },

    async snapshot(actor: Actor, number: string): Promise<AnyCertificateSnapshot> {
      authorize(actor, 'certificates:read');
      const row = await byNumber(dataSource.manager, actor, number, ['snapshot']);
      return row.snapshot as unknown as AnyCertificateSnapshot;
    },
  };
}
