import { AsyncLocalStorage } from 'node:async_hooks';
import crypto from 'node:crypto';
import fs from 'node:fs';
import type { CacheItem, CacheProvider, Profile } from '@node-saml/node-saml';
import { Strategy as SamlStrategy, type VerifiedCallback } from '@node-saml/passport-saml';
import { DOMParser } from '@xmldom/xmldom';
import type { Request } from 'express';
import type { DataSource } from 'typeorm';
import { roleSchema } from '../../shared/auth';
import type { AppConfig } from '../config';
import { UserEntity } from '../db/entities/core.entities';
import { upsertUserFromSignIn } from '../users/users.service';
import { SamlRefusal } from './saml-guard';
import { pruneSamlRequests } from './saml-request-prune';

export const SP_ENTITY_ID = 'chronolevel';
const REQUEST_ID_TTL_MS = 10 * 60 * 1000;

/** Outstanding AuthnRequest ids live in PostgreSQL, so InResponseTo checks survive restarts and span processes. */
export function pgSamlCache(dataSource: DataSource): CacheProvider {
  return {
    async saveAsync(key: string, value: string): Promise<CacheItem | null> {
      await pruneSamlRequests(dataSource, REQUEST_ID_TTL_MS);
      const rows: { created_at: Date }[] = await dataSource.query(
        'INSERT INTO saml_request(id, value) VALUES ($1, $2) ON CONFLICT (id) DO NOTHING RETURNING created_at',
        [key, value],
      );
      return rows.length ? { value, createdAt: rows[0].created_at.getTime() } : null;
    },
    async getAsync(key: string): Promise<string | null> {
      const rows: { value: string }[] = await dataSource.query(
        `SELECT value FROM saml_request WHERE id = $1 AND created_at > now() - ($2 || ' milliseconds')::interval`,
        [key, String(REQUEST_ID_TTL_MS)],
      );
      return rows[0]?.value ?? null;
    },
    async removeAsync(key: string | null): Promise<string | null> {
      if (!key) return null;
      const rows: { value: string }[] = await dataSource.query('DELETE FROM saml_request WHERE id = $1 RETURNING value', [key]);
      return rows[0]?.value ?? null;
    },
  };
}

function attr(profile: Profile, name: string): string | null {
  const v = (profile as Record<string, unknown>)[name] ?? (profile.attributes as Record<string, unknown> | undefined)?.[name];
  if (Array.isArray(v)) return v.length ? String(v[0]) : null;
  return v === undefined || v === null ? null : String(v);
}

/** While a login redirect is built, holds the AuthnRequest id chosen for it (read by generateUniqueId). */
export const pendingRequestId = new AsyncLocalStorage<string>();
export const newRequestId = () => '_' + crypto.randomBytes(20).toString('hex');

export const callbackUrlOf = (config: AppConfig) => `${config.publicUrl}/auth/saml/callback`;
export const idpIssuerOf = (config: AppConfig) => `${config.idpUrl}/metadata`;
export const ACCEPTED_CLOCK_SKEW_MS = 5000;

export function createSamlStrategy(config: AppConfig, dataSource: DataSource): SamlStrategy {
  const idpCert = fs.readFileSync(config.idpCertFile, 'utf8');
  const callbackUrl = callbackUrlOf(config);
  return new SamlStrategy(
    {
      name: 'saml',
      entryPoint: `${config.idpUrl}/sso`,
      issuer: SP_ENTITY_ID,
      audience: SP_ENTITY_ID,
      callbackUrl,
      idpCert,
      idpIssuer: idpIssuerOf(config),
      wantAssertionsSigned: true,
      wantAuthnResponseSigned: true,
      signatureAlgorithm: 'sha256',
      digestAlgorithm: 'sha256',
      validateInResponseTo: 'always' as never,
      requestIdExpirationPeriodMs: REQUEST_ID_TTL_MS,
      cacheProvider: pgSamlCache(dataSource),
      acceptedClockSkewMs: ACCEPTED_CLOCK_SKEW_MS,
      // The login route picks the AuthnRequest id (to bind it to the browser's cookie) before the request is built.
      generateUniqueId: () => pendingRequestId.getStore() ?? newRequestId(),
      maxAssertionAgeMs: 10 * 60 * 1000,
      identifierFormat: 'urn:oasis:names:tc:SAML:1.1:nameid-format:emailAddress',
      disableRequestedAuthnContext: true,
      passReqToCallback: true,
    },
    ((req: Request, profile: Profile | null, done: VerifiedCallback) => {
      void (async () => {
        if (!profile) throw new SamlRefusal('saml-invalid', 'no profile in the SAML response');
        const xml = profile.getAssertionXml?.();
        if (!xml) throw new SamlRefusal('saml-invalid', 'assertion missing');
        const doc = new DOMParser().parseFromString(xml, 'text/xml');
        const assertion = doc.documentElement;
        const assertionId = assertion?.getAttribute('ID');
        const confirmation = doc.getElementsByTagNameNS('urn:oasis:names:tc:SAML:2.0:assertion', 'SubjectConfirmationData')[0];
        if (!assertionId) throw new SamlRefusal('saml-invalid', 'assertion has no ID');
        if (confirmation?.getAttribute('Recipient') !== callbackUrl) throw new SamlRefusal('recipient', 'assertion recipient is not this service');
        const fresh: unknown[] = await dataSource.query(
          'INSERT INTO saml_assertion_seen(id) VALUES ($1) ON CONFLICT DO NOTHING RETURNING id',
          [assertionId],
        );
        if (!fresh.length) throw new SamlRefusal('replay', 'assertion was already used');
        const email = (attr(profile, 'email') ?? profile.nameID).toLowerCase();
        const role = roleSchema.safeParse(attr(profile, 'role'));
        if (!role.success) throw new SamlRefusal('attributes', 'role attribute missing or unknown');
        const known = await dataSource.getRepository(UserEntity).findOneBy({ email });
        if (known?.deactivatedAt) throw new SamlRefusal('account-deactivated', `account ${known.id} is deactivated`);
        const { user, assertedDiffers } = await upsertUserFromSignIn(dataSource, {
          email,
          displayName: attr(profile, 'displayName') ?? email,
          role: role.data,
          instituteCode: attr(profile, 'institute'),
        });
        if (assertedDiffers) {
          req.log?.info({ securityEvent: 'saml.role-differs', userId: user.id, asserted: { role: role.data, institute: attr(profile, 'institute') } }, 'identity provider asserts another role or institute; the local one stays');
        }
        return { id: user.id };
      })().then(
        (user) => done(null, user),
        (err: Error) => done(err instanceof SamlRefusal ? err : new SamlRefusal('attributes', err.message)),
      );
    }) as never,
    ((_req: Request, _profile: Profile | null, done: VerifiedCallback) => done(null, {})) as never,
  );
}
