import { randomBytes } from 'node:crypto';
import { chmod, mkdir, readFile, rename, writeFile } from 'node:fs/promises';
import path from 'node:path';
import forge from 'node-forge';
import { plainAddPlaceholder } from '@signpdf/placeholder-plain';
import { P12Signer } from '@signpdf/signer-p12';
import { SignPdf } from '@signpdf/signpdf';
import { randomPositiveInteger } from '../pki/der';

// The first releases' signing: a self-signed institute certificate in a P12 and a CMS (RFC 5652) SignedData,
// detached, embedded as /Contents with /SubFilter adbe.pkcs7.detached (ISO 32000-1:2008 12.8.3.3). Certificates
// are now signed at PAdES B-LTA (pades.ts); this stays so legacy files can be made and recognised in tests.

export interface SigningIdentity {
  p12: Buffer;
  passphrase: string;
  certificatePem: string;
}

export interface InstituteSubject {
  commonName: string;
  organization: string;
  /** ISO 3166 two-letter code; optional because demo institutes live in an invented country. */
  country?: string;
}

export interface EnsureIdentityOptions {
  /** Protects the generated P12; when absent a random one is generated and kept beside it (mode 0600). */
  passphrase?: string;
  /** Use the institute's real P12 instead of generating one; `passphrase` is then required. */
  p12Path?: string;
  /** Start of the certificate's validity; a parameter so tests and seeds are reproducible. */
  now?: Date;
  validityYears?: number;
}

const P12_FILE = 'institute-signing.p12';
const PASSPHRASE_FILE = 'institute-signing.passphrase';
const CERT_FILE = 'institute-signing.cert.pem';

/** Reads the signer certificate back out of a P12, so the identity is always self-consistent. */
export function signingIdentityFromP12(p12: Buffer, passphrase: string): SigningIdentity {
  const asn1 = forge.asn1.fromDer(forge.util.createBuffer(p12.toString('binary')));
  const pkcs12 = forge.pkcs12.pkcs12FromAsn1(asn1, false, passphrase);
  const keyBag = pkcs12.getBags({ bagType: forge.pki.oids.pkcs8ShroudedKeyBag })[forge.pki.oids.pkcs8ShroudedKeyBag]?.[0];
  const key = keyBag?.key as forge.pki.rsa.PrivateKey | undefined;
  if (!key) throw new Error('P12 holds no private key');
  const certs = pkcs12.getBags({ bagType: forge.pki.oids.certBag })[forge.pki.oids.certBag] ?? [];
  const match = certs.find((bag) => {
    const pub = bag.cert?.publicKey as forge.pki.rsa.PublicKey | undefined;
    return pub && pub.n.equals(key.n) && pub.e.equals(key.e);
  });
  if (!match?.cert) throw new Error('P12 holds no certificate matching its private key');
  return { p12, passphrase, certificatePem: forge.pki.certificateToPem(match.cert) };
}

function createSelfSignedIdentity(subject: InstituteSubject, passphrase: string, now: Date, validityYears: number): SigningIdentity {
  // forge delegates to Node's native generateKeyPairSync when it is available.
  const keys = forge.pki.rsa.generateKeyPair({ bits: 3072, e: 0x10001 });
  const cert = forge.pki.createCertificate();
  cert.publicKey = keys.publicKey;
  // Positive serial, DER as it stands (RFC 5280 4.1.2.2).
  cert.serialNumber = randomPositiveInteger(16).toString('hex');
  cert.validity.notBefore = now;
  cert.validity.notAfter = new Date(now.getTime());
  cert.validity.notAfter.setUTCFullYear(now.getUTCFullYear() + validityYears);
  const attrs: forge.pki.CertificateField[] = [
    { name: 'commonName', value: subject.commonName },
    { name: 'organizationName', value: subject.organization },
  ];
  if (subject.country) attrs.push({ name: 'countryName', value: subject.country });
  cert.setSubject(attrs);
  cert.setIssuer(attrs);
  cert.setExtensions([
    { name: 'basicConstraints', cA: false, critical: true },
    { name: 'keyUsage', digitalSignature: true, nonRepudiation: true, critical: true },
    { name: 'subjectKeyIdentifier' },
  ]);
  cert.sign(keys.privateKey, forge.md.sha256.create());
  const p12Asn1 = forge.pkcs12.toPkcs12Asn1(keys.privateKey, [cert], passphrase, {
    algorithm: 'aes256',
    friendlyName: subject.commonName,
  });
  const p12 = Buffer.from(forge.asn1.toDer(p12Asn1).getBytes(), 'binary');
  return { p12, passphrase, certificatePem: forge.pki.certificateToPem(cert) };
}

async function readIfExists(file: string): Promise<Buffer | undefined> {
  try {
    return await readFile(file);
  } catch (err) {
    if ((err as NodeJS.ErrnoException).code === 'ENOENT') return undefined;
    throw err;
  }
}

async function writeSecret(file: string, data: Buffer | string): Promise<void> {
  // Write-then-rename so a concurrent reader never sees half a key file.
  const tmp = `${file}.${process.pid}.${randomBytes(4).toString('hex')}.tmp`;
  await writeFile(tmp, data, { mode: 0o600 });
  await rename(tmp, file);
}

/**
 * Returns the coordinating institute's signing identity. With `p12Path` it loads a real institute
 * P12; otherwise it creates, on first call, an RSA-3072 key with a self-signed X.509 certificate in
 * `dir` (callers pass a git-ignored folder such as `.secrets/`) and reuses it afterwards.
 */
export async function ensureInstituteSigningIdentity(
  dir: string,
  subject: InstituteSubject,
  options: EnsureIdentityOptions = {},
): Promise<SigningIdentity> {
  if (options.p12Path) {
    if (options.passphrase === undefined) throw new Error('a passphrase is required to open an existing institute P12');
    return signingIdentityFromP12(await readFile(options.p12Path), options.passphrase);
  }

  const p12File = path.join(dir, P12_FILE);
  const passphraseFile = path.join(dir, PASSPHRASE_FILE);
  const existing = await readIfExists(p12File);
  if (existing) {
    const passphrase = options.passphrase ?? (await readIfExists(passphraseFile))?.toString('utf8').trim();
    if (passphrase === undefined) throw new Error(`${p12File} exists but no passphrase was given or stored beside it`);
    return signingIdentityFromP12(existing, passphrase);
  }

  await mkdir(dir, { recursive: true, mode: 0o700 });
  const passphrase = options.passphrase ?? randomBytes(24).toString('base64url');
  const identity = createSelfSignedIdentity(subject, passphrase, options.now ?? new Date(), options.validityYears ?? 10);
  if (options.passphrase === undefined) await writeSecret(passphraseFile, passphrase);
  await writeSecret(p12File, identity.p12);
  await writeFile(path.join(dir, CERT_FILE), identity.certificatePem);
  await chmod(dir, 0o700);
  return identity;
}

export interface SignOptions {
  reason: string;
  location: string;
  name: string;
  contactInfo?: string;
  /** Recorded as the CMS signingTime attribute and the dictionary's /M; defaults to now. */
  signingTime?: Date;
}

/** Room for the CMS blob: an RSA-3072 signature plus the certificate come to about 2.5 kB. */
const SIGNATURE_LENGTH_BYTES = 8192;

export async function signPdf(pdf: Buffer, identity: SigningIdentity, options: SignOptions): Promise<Buffer> {
  const signingTime = options.signingTime ?? new Date();
  const withPlaceholder = plainAddPlaceholder({
    pdfBuffer: pdf,
    reason: options.reason,
    location: options.location,
    name: options.name,
    contactInfo: options.contactInfo ?? '',
    signingTime,
    signatureLength: SIGNATURE_LENGTH_BYTES,
    subFilter: 'adbe.pkcs7.detached',
    appName: 'Chronolevel',
  });
  const signer = new P12Signer(identity.p12, { passphrase: identity.passphrase });
  return new SignPdf().sign(withPlaceholder, signer, signingTime);
}
