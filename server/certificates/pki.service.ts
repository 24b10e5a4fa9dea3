import type { DataSource, EntityManager } from 'typeorm';
import type { RevokeSigningKey, TrustAnchorInfo } from '../../shared/certificate-signature';
import { recordAudit } from '../audit/audit.service';
import type { Actor } from '../auth/actor';
import { authorize } from '../auth/permissions';
import type { AppConfig } from '../config';
import { Conflict } from '../http/errors';
import { currentSigningKey, instituteCa, instituteSubject, latestCrl, publishCrl, trustedTsaRoots } from './institute-identity';
import { certificateDer, fingerprintSha256, nameToString, parseCertificate } from './pki/der';

// The institute CA as the outside world sees it: the root to install, the CRL to fetch, and the withdrawal of
// the signing key after a compromise (admin), which publishes a new CRL and marks every certificate signed with it.

export const PKI_PATHS = {
  rootPem: '/api/v1/pki/institute-root-ca.pem',
  rootDer: '/api/v1/pki/institute-root-ca.cer',
  crl: '/api/v1/pki/institute-ca.crl',
};

export async function withdrawSigningKey(manager: EntityManager, config: AppConfig, actor: Actor, input: RevokeSigningKey, now = new Date()) {
  const subject = await instituteSubject(manager);
  const ca = await instituteCa(config, subject);
  if (!ca.rootKeyPem) throw new Conflict('The signing key comes from a configured P12: withdraw it at the CA that issued it; its CRL is published there.');
  const key = await currentSigningKey(manager, config, subject);
  const compromisedSince = input.compromisedSince ? new Date(input.compromisedSince) : now;
  if (compromisedSince > now) throw new Conflict('compromisedSince lies in the future.');
  await manager.query(
    `INSERT INTO signing_key_revocation (serial_hex, certificate_pem, revoked_at, compromised_since, reason, revoked_by) VALUES ($1, $2, $3, $4, $5, $6)`,
    [key.serialHex, key.certPem, now, compromisedSince, input.reason, actor.userId],
  );
  const crl = await publishCrl(manager, config, subject, now);
  const affected: { number: string }[] = await manager.query(
    `SELECT number FROM certificate WHERE signing_key_serial = $1 AND signing_key_revoked_at IS NULL ORDER BY number FOR UPDATE`, [key.serialHex],
  );
  await manager.query(`UPDATE certificate SET signing_key_revoked_at = $2 WHERE signing_key_serial = $1 AND signing_key_revoked_at IS NULL`, [key.serialHex, now]);
  const numbers = affected.map((r) => r.number);
  await recordAudit(manager, actor, {
    action: 'signing-key.revoked', entityType: 'signing-key', entityId: key.serialHex,
    details: { reason: input.reason, compromisedSince: compromisedSince.toISOString(), crlNumber: crl?.number ?? null, affectedCertificates: numbers },
  });
  return { serial: key.serialHex, revokedAt: now.toISOString(), compromisedSince: compromisedSince.toISOString(), crlNumber: crl?.number ?? null, affectedCertificates: numbers };
}

export function createPkiService(dataSource: DataSource, config: AppConfig) {
  return {
    async trustAnchor(): Promise<TrustAnchorInfo> {
      const ca = await instituteCa(config, await instituteSubject(dataSource.manager));
      const root = parseCertificate(ca.rootDer);
      const tsaRoots = (await trustedTsaRoots(config)).map((der) => ({ subject: nameToString(parseCertificate(der).subject), sha256Fingerprint: fingerprintSha256(der) }));
      return {
        subject: nameToString(root.subject), sha256Fingerprint: ca.rootFingerprint,
        notBefore: root.notBefore.value.toISOString(), notAfter: root.notAfter.value.toISOString(),
        pemUrl: `${config.publicUrl}${PKI_PATHS.rootPem}`, derUrl: `${config.publicUrl}${PKI_PATHS.rootDer}`, crlUrl: ca.crlUrl, tsaRoots,
      };
    },
    async rootCertificate() {
      const ca = await instituteCa(config, await instituteSubject(dataSource.manager));
      return { pem: ca.rootPem, der: certificateDer(parseCertificate(ca.rootDer)) };
    },
    /** The newest published CRL (read-only: CRLs are published when certificates are issued or a key is withdrawn). */
    async crl() {
      return latestCrl(dataSource.manager);
    },
    async withdrawSigningKey(actor: Actor, input: RevokeSigningKey) {
      authorize(actor, 'signing-keys:revoke');
      return dataSource.transaction((manager) => withdrawSigningKey(manager, config, actor, input));
    },
    /** Publishes a fresh CRL (admin command line, e.g. from a daily timer, so the CRL never runs out). */
    async publishCrl() {
      return dataSource.transaction(async (manager) => publishCrl(manager, config, await instituteSubject(manager)));
    },
  };
}
