import fs from 'node:fs';
import type { CacheItem, CacheProvider, Profile } from '@node-saml/node-saml';
import { Strategy as SamlStrategy, type VerifiedCallback } from '@node-saml/passport-saml';
import { DOMParser } from '@xmldom/xmldom';
import type { Request } from 'express';
import type { DataSource } from 'typeorm';
import { roleSchema } from '../../shared/auth';
import type { AppConfig } from '../config';
import { upsertUserFromSignIn } from '../users/users.service';
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

export function createSamlStrategy(config: AppConfig, dataSource: DataSource): SamlStrategy {
  const idpCert = fs.readFileSync(config.idpCertFile, 'utf8');
  const callbackUrl = `${config.publicUrl}/auth/saml/callback`;
  return new SamlStrategy(
    {
      name: 'saml',
      entryPoint: `${config.idpUrl}/sso`,
      issuer: SP_ENTITY_ID,
      audience: SP_ENTITY_ID,
      callbackUrl,
      idpCert,
      idpIssuer: `${config.idpUrl}/metadata`,
      wantAssertionsSigned: true,
      wantAuthnResponseSigned: true,
      signatureAlgorithm: 'sha256',
      digestAlgorithm: 'sha256',
      validateInResponseTo: 'always' as never,
      requestIdExpirationPeriodMs: REQUEST_ID_TTL_MS,
      cacheProvider: pgSamlCache(dataSource),
      acceptedClockSkewMs: 5000,
      maxAssertionAgeMs: 10 * 60 * 1000,
      identifierFormat: 'urn:oasis:names:tc:SAML:1.1:nameid-format:emailAddress',
      disableRequestedAuthnContext: true,
      passReqToCallback: true,
    },
    ((_req: Request, profile: Profile | null, done: VerifiedCallback) => {
      void (async () => {
        if (!profile) throw new Error('no profile in the SAML response');
        const xml = profile.getAssertionXml?.();
        if (!xml) throw new Error('assertion missing');
        const doc = new DOMParser().parseFromString(xml, 'text/xml');
        const assertion = doc.documentElement;
        const assertionId = assertion?.getAttribute('ID');
        const confirmation = doc.getElementsByTagNameNS('urn:oasis:names:tc:SAML:2.0:assertion', 'SubjectConfirmationData')[0];
        if (!assertionId) throw new Error('assertion has no ID');
        if (confirmation?.getAttribute('Recipient') !== callbackUrl) throw new Error('assertion recipient is not this service');
        const fresh: unknown[] = await dataSource.query(
          'INSERT INTO saml_assertion_seen(id) VALUES ($1) ON CONFLICT DO NOTHING RETURNING id',
          [assertionId],
        );
        if (!fresh.length) throw new Error('assertion was already used (replay)');
        const email = (attr(profile, 'email') ?? profile.nameID).toLowerCase();
        const role = roleSchema.parse(attr(profile, 'role'));
        const user = await upsertUserFromSignIn(dataSource, {
          email,
          displayName: attr(profile, 'displayName') ?? email,
          role,
          instituteCode: attr(profile, 'institute'),
        });
        return { id: user.id };
      })().then(
        (user) => done(null, user),
        (err: Error) => done(err),
      );
    }) as never,
    ((_req: Request, _profile: Profile | null, done: VerifiedCallback) => done(null, {})) as never,
  );
}
