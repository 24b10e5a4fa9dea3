import { randomUUID } from 'node:crypto';
import { mkdir, readdir, readFile, rename, rmdir, stat, writeFile } from 'node:fs/promises';
import path from 'node:path';
import forge from 'node-forge';
import type { EntityManager } from 'typeorm';
import type { AppConfig } from '../config';
import { InstituteEntity } from '../db/entities/core.entities';
import { derToPem, fingerprintSha256, parseCertificate, pemBundleToDer, pemToDer, serialHex } from './pki/der';
import { createCertificate, createCrl, type KeyAndCertificate } from './pki/x509';

// The coordinating institute's certificate authority. On first start an RSA-3072 root CA is generated in
// <secretsDir>/signing (or a configured P12 holds the signing key and its chain); the root issues the
// certificate-signing certificate (digitalSignature + nonRepudiation, document-signing purposes, a CRL
// distribution point at this server) and signs the CRLs. Which signing keys are withdrawn, and every CRL
// issued, is kept in the database; the keys themselves stay in the secrets folder.

export interface InstituteSubject {
  commonName: string;
  organization: string;
}

export interface InstituteCa {
  /** Root certificate (PEM/DER) pinned by the verifier and offered for download. */
  rootPem: string;
  rootDer: Buffer;
  rootFingerprint: string;
  /** The root's key, absent with a configured P12 (the external CA publishes the CRLs then). */
  rootKeyPem?: string;
  /** Where relying parties fetch the CRL; written into every signing certificate. */
  crlUrl: string;
  /** A configured P12's signing key and chain. */
  configured?: SigningKey;
}

export interface SigningKey {
  keyPem: string;
  certPem: string;
  certDer: Buffer;
  serialHex: string;
  /** Certificates between the signing certificate and the root, root included. */
  chainDer: Buffer[];
}

const ROOT_FILE = 'institute-root-ca.json';
const KEYS_DIR = 'signing-keys';
const LEGACY_CERT_FILE = 'institute-signing.cert.pem';

export function signingDirectory(config: AppConfig): string {
  return path.join(config.secretsDir, 'signing');
}

export function crlUrlFor(config: AppConfig): string {
  return `${config.publicUrl}/api/v1/pki/institute-ca.crl`;
}

export async function coordinatingInstitute(manager: EntityManager) {
  return manager.getRepository(InstituteEntity).findOne({ where: { kind: 'coordinating' }, order: { createdAt: 'ASC' } });
}

export async function instituteSubject(manager: EntityManager): Promise<InstituteSubject> {
  const institute = await coordinatingInstitute(manager);
  const name = institute?.name ?? 'Coordinating institute';
  return { commonName: name, organization: name };
}

async function exists(file: string): Promise<boolean> {
  return stat(file).then(() => true, () => false);
}

/** Several processes may share a secrets folder (parallel test files): only one may generate a key. */
async function withDirectoryLock<T>(lockDir: string, fn: () => Promise<T>): Promise<T> {
  const deadline = Date.now() + 60_000;
  for (;;) {
    try {
      await mkdir(lockDir);
      break;
    } catch (err) {
      if ((err as NodeJS.ErrnoException).code !== 'EEXIST') throw err;
      if (Date.now() > deadline) throw new Error(`signing identity lock ${lockDir} held for over a minute; remove it if no process is starting`, { cause: err });
      await new Promise((r) => setTimeout(r, 100));
    }
  }
  try {
    return await fn();
  } finally {
    await rmdir(lockDir).catch(() => undefined);
  }
}

async function writeSecret(file: string, data: string): Promise<void> {
  // Write-then-rename so a concurrent reader never sees half a key file.
  const tmp = `${file}.${process.pid}.${randomUUID()}.tmp`;
  await writeFile(tmp, data, { mode: 0o600 });
  await rename(tmp, file);
}

function fromP12(p12: Buffer, passphrase: string, crlUrl: string): InstituteCa {
  const pkcs12 = forge.pkcs12.pkcs12FromAsn1(forge.asn1.fromDer(forge.util.createBuffer(p12.toString('binary'))), false, passphrase);
  const keyBag = pkcs12.getBags({ bagType: forge.pki.oids.pkcs8ShroudedKeyBag })[forge.pki.oids.pkcs8ShroudedKeyBag]?.[0];
  const key = keyBag?.key as forge.pki.rsa.PrivateKey | undefined;
  if (!key) throw new Error('the configured P12 holds no private key');
  const certs = (pkcs12.getBags({ bagType: forge.pki.oids.certBag })[forge.pki.oids.certBag] ?? []).map((b) => b.cert!).filter(Boolean);
  const leaf = certs.find((c) => (c.publicKey as forge.pki.rsa.PublicKey).n.equals(key.n));
  if (!leaf) throw new Error('the configured P12 holds no certificate matching its key');
  const root = certs.find((c) => c !== leaf && c.isIssuer(c));
  if (!root) throw new Error('the configured P12 must also hold the chain up to its root CA');
  const der = (c: forge.pki.Certificate) => Buffer.from(forge.asn1.toDer(forge.pki.certificateToAsn1(c)).getBytes(), 'binary');
  const leafDer = der(leaf);
  const chain = certs.filter((c) => c !== leaf).map(der);
  const rootDer = der(root);
  return {
    rootPem: forge.pki.certificateToPem(root), rootDer, rootFingerprint: fingerprintSha256(rootDer), crlUrl,
    configured: { keyPem: forge.pki.privateKeyInfoToPem(forge.pki.wrapRsaPrivateKey(forge.pki.privateKeyToAsn1(key))), certPem: forge.pki.certificateToPem(leaf), certDer: leafDer, serialHex: serialHex(parseCertificate(leafDer)), chainDer: chain },
  };
}

const caCache = new Map<string, Promise<InstituteCa>>();

/** Loads (or creates once) the institute root CA; memoised per process. */
export function instituteCa(config: AppConfig, subject: InstituteSubject): Promise<InstituteCa> {
  const key = config.signingP12File ?? signingDirectory(config);
  let ca = caCache.get(key);
  if (!ca) {
    ca = (async (): Promise<InstituteCa> => {
      if (config.signingP12File) return fromP12(await readFile(config.signingP12File), config.signingP12Passphrase ?? '', crlUrlFor(config));
      const dir = signingDirectory(config);
      const file = path.join(dir, ROOT_FILE);
      await mkdir(dir, { recursive: true, mode: 0o700 });
      const load = async () => JSON.parse(await readFile(file, 'utf8')) as KeyAndCertificate & { crlUrl: string };
      const root = (await exists(file))
        ? await load()
        : await withDirectoryLock(`${dir}.lock`, async () => {
            if (await exists(file)) return load();
            const created = createCertificate({
              subject: { commonName: `${subject.commonName} Root CA`, organization: subject.organization },
              profile: { kind: 'root-ca' }, validityYears: 30,
            });
            const value = { ...created, crlUrl: crlUrlFor(config) };
            await writeSecret(file, JSON.stringify(value));
            await writeFile(path.join(dir, 'institute-root-ca.pem'), created.certPem);
            return value;
          });
      const rootDer = pemToDer(root.certPem);
      return { rootPem: root.certPem, rootDer, rootFingerprint: fingerprintSha256(rootDer), rootKeyPem: root.keyPem, crlUrl: root.crlUrl };
    })();
    ca.catch(() => caCache.delete(key));
    caCache.set(key, ca);
  }
  return ca;
}

async function revokedSerials(manager: EntityManager): Promise<Set<string>> {
  const rows: { serial_hex: string }[] = await manager.query(`SELECT serial_hex FROM signing_key_revocation`);
  return new Set(rows.map((r) => r.serial_hex));
}

async function readKeyFiles(dir: string): Promise<(SigningKey & { createdAt: string })[]> {
  const names = await readdir(dir).catch(() => [] as string[]);
  const keys = await Promise.all(names.filter((n) => n.endsWith('.json')).map(async (n) => JSON.parse(await readFile(path.join(dir, n), 'utf8')) as KeyAndCertificate & { createdAt: string }));
  return keys.map((k) => {
    const certDer = pemToDer(k.certPem);
    return { keyPem: k.keyPem, certPem: k.certPem, certDer, serialHex: serialHex(parseCertificate(certDer)), chainDer: [], createdAt: k.createdAt };
  });
}

/**
 * The key that signs certificates now: the newest signing key in the secrets folder that this installation has
 * not withdrawn; a new one is issued by the root when there is none (first start, or after a withdrawal).
 */
export async function currentSigningKey(manager: EntityManager, config: AppConfig, subject: InstituteSubject): Promise<SigningKey> {
  const ca = await instituteCa(config, subject);
  const revoked = await revokedSerials(manager);
  if (ca.configured) {
    if (revoked.has(ca.configured.serialHex)) throw new Error('the configured signing key was withdrawn; configure a new SIGNING_P12_FILE');
    return ca.configured;
  }
  const dir = path.join(signingDirectory(config), KEYS_DIR);
  const pick = async () => (await readKeyFiles(dir)).filter((k) => !revoked.has(k.serialHex)).sort((a, b) => b.createdAt.localeCompare(a.createdAt))[0];
  let key = await pick();
  if (!key) {
    await mkdir(dir, { recursive: true, mode: 0o700 });
    key = await withDirectoryLock(`${dir}.lock`, async () => {
      const again = await pick();
      if (again) return again;
      const createdAt = new Date().toISOString();
      const created = createCertificate({
        subject: { commonName: `${subject.commonName} certificate signing`, organization: subject.organization },
        profile: { kind: 'document-signing', crlUrl: ca.crlUrl },
        issuer: { keyPem: ca.rootKeyPem!, certPem: ca.rootPem },
        validityYears: 5,
      });
      const certDer = pemToDer(created.certPem);
      const serial = serialHex(parseCertificate(certDer));
      await writeSecret(path.join(dir, `${serial}.json`), JSON.stringify({ ...created, createdAt }));
      return { keyPem: created.keyPem, certPem: created.certPem, certDer, serialHex: serial, chainDer: [], createdAt };
    });
  }
  return { ...key, chainDer: [ca.rootDer] };
}

export interface PublishedCrl {
  number: number;
  thisUpdate: Date;
  nextUpdate: Date;
  der: Buffer;
}

/** CRLs are valid for a week; a new one is published at every issue and every withdrawal of a signing key. */
export const CRL_VALIDITY_DAYS = 7;

/** Issues the next CRL from the withdrawal records (inside the caller's transaction). Needs the root key. */
export async function publishCrl(manager: EntityManager, config: AppConfig, subject: InstituteSubject, now = new Date()): Promise<PublishedCrl | null> {
  const ca = await instituteCa(config, subject);
  if (!ca.rootKeyPem) return null;
  await manager.query(`SELECT pg_advisory_xact_lock(hashtext('institute-crl'))`);
  const [{ next }]: { next: string }[] = await manager.query(`SELECT coalesce(max(crl_number), 0) + 1 AS next FROM institute_crl`);
  const rows: { serial_hex: string; revoked_at: Date; compromised_since: Date | null }[] = await manager.query(
    `SELECT serial_hex, revoked_at, compromised_since FROM signing_key_revocation ORDER BY revoked_at`,
  );
  const number = Number(next);
  // A second of slack: the CRL must not look newer than a time-stamp taken in the same second.
  const thisUpdate = new Date(Math.floor(now.getTime() / 1000) * 1000);
  const der = await createCrl({
    issuer: { keyPem: ca.rootKeyPem, certPem: ca.rootPem },
    crlNumber: number, thisUpdate, validityDays: CRL_VALIDITY_DAYS,
    revoked: rows.map((r) => ({ serialHex: r.serial_hex, revokedAt: r.revoked_at, reasonCode: 1, ...(r.compromised_since ? { invalidityDate: r.compromised_since } : {}) })),
  });
  const nextUpdate = new Date(thisUpdate.getTime() + CRL_VALIDITY_DAYS * 86_400_000);
  await manager.query(`INSERT INTO institute_crl (crl_number, this_update, next_update, der) VALUES ($1, $2, $3, $4)`, [number, thisUpdate, nextUpdate, der]);
  return { number, thisUpdate, nextUpdate, der };
}

export async function latestCrl(manager: EntityManager): Promise<PublishedCrl | null> {
  const rows: { crl_number: string; this_update: Date; next_update: Date; der: Buffer }[] = await manager.query(
    `SELECT crl_number, this_update, next_update, der FROM institute_crl ORDER BY crl_number DESC LIMIT 1`,
  );
  return rows[0] ? { number: Number(rows[0].crl_number), thisUpdate: rows[0].this_update, nextUpdate: rows[0].next_update, der: rows[0].der } : null;
}

/**
 * The self-signed certificate of the first releases, which signed certificates directly (no chain, no
 * time-stamp). Kept so those files are still recognised, as legacy signatures.
 */
export async function legacyCertificatePem(config: AppConfig): Promise<string | undefined> {
  const file = path.join(signingDirectory(config), LEGACY_CERT_FILE);
  return (await exists(file)) ? readFile(file, 'utf8') : undefined;
}

export async function trustedTsaRoots(config: AppConfig): Promise<Buffer[]> {
  return (await exists(config.tsaRootCertFile)) ? pemBundleToDer(await readFile(config.tsaRootCertFile, 'utf8')) : [];
}

export function rootPemOf(ca: InstituteCa): string {
  return ca.rootPem.includes('BEGIN CERTIFICATE') ? ca.rootPem : derToPem(ca.rootDer);
}
