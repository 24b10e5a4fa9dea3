import type { DataSource, EntityManager } from 'typeorm';
import type { CertificateDetail, CertificateListQuery, CertificateSummary } from '../../shared/certificate-registry';
import type { CertificateSnapshot } from '../../shared/certificates';
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
    campaignId: row.campaignId,
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

function scopeCheck(actor: Actor, row: CertificateRow): void {
  // As for campaigns (docs/decisions/0004-campaign-visibility.md): another institute's certificate does not exist
  // for lab staff — numbers are sequential, so a 403 would confirm each one.
  if (actor.role === 'operator' && actor.instituteId !== row.instituteAId && actor.instituteId !== row.instituteBId) {
    throw new NotFound('Certificate');
  }
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
    scopeCheck(actor, row);
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
      if (actor.role === 'operator') qb.andWhere('(c.institute_a_id = :own OR c.institute_b_id = :own)', { own: actor.instituteId });
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
      const snapshot = row.snapshot as unknown as CertificateSnapshot;
      const revisions = await manager.getRepository(CertificateEntity).find({ where: { year: row.year, serial: row.serial }, order: { revision: 'ASC' } });
      const latest = revisions[revisions.length - 1];
      return {
        ...(await toCertificateSummary(manager, row)),
        revisions: revisions.map((r) => ({ number: r.number, revision: r.revision, state: r.state, issuedAt: r.issuedAt.toISOString() })),
        latestNumber: latest.number === row.number ? null : latest.number,
        auditChainHead: snapshot.auditChainHead,
        measurementPeriod: snapshot.measurementPeriod,
        deltaC_m2s2: snapshot.deltaC_m2s2,
        deltaH_m: snapshot.deltaH_m,
        En: snapshot.geodeticComparison.En,
        agreed: snapshot.geodeticComparison.agreed,
      };
    },

    async pdf(actor: Actor, number: string) {
      authorize(actor, 'certificates:read');
      const row = await byNumber(dataSource.manager, actor, number, ['pdf']);
      return { number: row.number, pdf: row.pdf, sha256: row.pdfSha256 };
    },

    async snapshot(actor: Actor, number: string): Promise<CertificateSnapshot> {
      authorize(actor, 'certificates:read');
      const row = await byNumber(dataSource.manager, actor, number, ['snapshot']);
      return row.snapshot as unknown as CertificateSnapshot;
    },
  };
}
