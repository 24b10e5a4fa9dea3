import { mkdir, rmdir, stat } from 'node:fs/promises';
import path from 'node:path';
import type { EntityManager } from 'typeorm';
import type { AppConfig } from '../config';
import { InstituteEntity } from '../db/entities/core.entities';
import { ensureInstituteSigningIdentity, type SigningIdentity } from './pdf/signing';

// The coordinating institute's signing identity: the configured P12 when there is one, otherwise a generated
// key kept in <secretsDir>/signing. Its certificate is the one verification pins.

const cache = new Map<string, Promise<SigningIdentity>>();

async function exists(file: string): Promise<boolean> {
  return stat(file).then(() => true, () => false);
}

/** Several processes may share a secrets folder (parallel test files): only one may generate the key. */
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

export function signingDirectory(config: AppConfig): string {
  return path.join(config.secretsDir, 'signing');
}

export async function coordinatingInstitute(manager: EntityManager) {
  return manager.getRepository(InstituteEntity).findOne({ where: { kind: 'coordinating' }, order: { createdAt: 'ASC' } });
}

/** Loads (or creates once) the identity that signs certificates; memoised per process. */
export function instituteSigningIdentity(config: AppConfig, subject: { commonName: string; organization: string }): Promise<SigningIdentity> {
  const key = config.signingP12File ?? signingDirectory(config);
  let identity = cache.get(key);
  if (!identity) {
    identity = (async () => {
      if (config.signingP12File) {
        return ensureInstituteSigningIdentity(signingDirectory(config), subject, { p12Path: config.signingP12File, passphrase: config.signingP12Passphrase ?? '' });
      }
      const dir = signingDirectory(config);
      await mkdir(config.secretsDir, { recursive: true, mode: 0o700 });
      if (await exists(path.join(dir, 'institute-signing.p12'))) return ensureInstituteSigningIdentity(dir, subject);
      return withDirectoryLock(`${dir}.lock`, () => ensureInstituteSigningIdentity(dir, subject));
    })();
    identity.catch(() => cache.delete(key));
    cache.set(key, identity);
  }
  return identity;
}
