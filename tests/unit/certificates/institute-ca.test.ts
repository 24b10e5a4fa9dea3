import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import forge from 'node-forge';
import { afterAll, describe, expect, it } from 'vitest';
import { loadConfig } from '../../../server/config';
import { instituteCa } from '../../../server/certificates/institute-identity';
import { fingerprintSha256, parseCertificate, pemToDer, serialHex } from '../../../server/certificates/pki/der';
import { createCertificate } from '../../../server/certificates/pki/x509';

// The institute CA: generated once into the secrets folder, or read from a configured P12 with its chain.
// Certificate fields follow RFC 5280 4.2.1.3 (key usage), 4.2.1.9 (basic constraints), 4.2.1.12 (extended key
// usage: id-kp-documentSigning from RFC 9336 3.1), 4.2.1.13 (CRL distribution points).

const dir = mkdtempSync(path.join(tmpdir(), 'chronolevel-ca-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));
const configFor = (env: Record<string, string>) => loadConfig({ DATABASE_URL: 'postgres://unused', SESSION_SECRET: 'unit-test-session-secret', PUBLIC_URL: 'https://certs.example.invalid', ...env });

describe('institute root CA', () => {
  it('is generated once as a self-signed CA for certificate and CRL signing, and reused', async () => {
    const config = configFor({ SECRETS_DIR: path.join(dir, 'generated') });
    const ca = await instituteCa(config, { commonName: 'Meridian Geodetic Institute', organization: 'Meridian Geodetic Institute' });
    const cert = forge.pki.certificateFromPem(ca.rootPem);
    expect(cert.verify(cert)).toBe(true);
    expect((cert.publicKey as forge.pki.rsa.PublicKey).n.bitLength()).toBe(3072);
    expect(cert.getExtension('basicConstraints')).toMatchObject({ cA: true, critical: true });
    expect(cert.getExtension('keyUsage')).toMatchObject({ keyCertSign: true, cRLSign: true, digitalSignature: false });
    expect(ca.crlUrl).toBe('https://certs.example.invalid/api/v1/pki/institute-ca.crl');
    expect(ca.rootFingerprint).toBe(fingerprintSha256(pemToDer(ca.rootPem)));
    expect(ca.rootKeyPem).toContain('PRIVATE KEY');
    const stored = JSON.parse(readFileSync(path.join(config.secretsDir, 'signing', 'institute-root-ca.json'), 'utf8'));
    expect(stored.certPem).toBe(ca.rootPem);
    expect((await instituteCa(config, { commonName: 'other', organization: 'other' })).rootFingerprint).toBe(ca.rootFingerprint);
  });

  it('document-signing certificates carry the purposes, key usage and CRL address a PDF reader checks', () => {
    const root = createCertificate({ subject: { commonName: 'R', organization: 'O' }, profile: { kind: 'root-ca' }, bits: 2048 });
    const leaf = createCertificate({ subject: { commonName: 'S', organization: 'O' }, profile: { kind: 'document-signing', crlUrl: 'http://crl.example.invalid/x.crl' }, issuer: root, bits: 2048 });
    const cert = forge.pki.certificateFromPem(leaf.certPem);
    expect(forge.pki.certificateFromPem(root.certPem).verify(cert)).toBe(true);
    expect(cert.getExtension('keyUsage')).toMatchObject({ digitalSignature: true, nonRepudiation: true, critical: true });
    expect(cert.getExtension('basicConstraints')).toMatchObject({ cA: false });
    const eku = parseCertificate(pemToDer(leaf.certPem)).extensions!.find((e) => e.extnID === '2.5.29.37')!.parsedValue as { keyPurposes: string[] };
    expect(eku.keyPurposes.sort()).toEqual(['1.2.840.113583.1.1.5', '1.3.6.1.5.5.7.3.36', '1.3.6.1.5.5.7.3.4']);
    const cdp = parseCertificate(pemToDer(leaf.certPem)).extensions!.find((e) => e.extnID === '2.5.29.31');
    expect(Buffer.from(cdp!.extnValue.valueBlock.valueHexView).toString('latin1')).toContain('http://crl.example.invalid/x.crl');
  });

  it('reads a configured P12 with its chain instead of generating one; the root then has no key here', async () => {
    const root = createCertificate({ subject: { commonName: 'External Root', organization: 'External CA' }, profile: { kind: 'root-ca' }, bits: 2048 });
    const leaf = createCertificate({ subject: { commonName: 'Signing', organization: 'Institute' }, profile: { kind: 'document-signing' }, issuer: root, bits: 2048 });
    const p12 = forge.pkcs12.toPkcs12Asn1(forge.pki.privateKeyFromPem(leaf.keyPem), [forge.pki.certificateFromPem(leaf.certPem), forge.pki.certificateFromPem(root.certPem)], 'p12-pass', { algorithm: 'aes256' });
    const file = path.join(dir, 'institute.p12');
    writeFileSync(file, Buffer.from(forge.asn1.toDer(p12).getBytes(), 'binary'));
    const config = configFor({ SECRETS_DIR: path.join(dir, 'configured'), SIGNING_P12_FILE: file, SIGNING_P12_PASSPHRASE: 'p12-pass' });
    const ca = await instituteCa(config, { commonName: 'ignored', organization: 'ignored' });
    expect(ca.rootKeyPem).toBeUndefined();
    expect(ca.rootFingerprint).toBe(fingerprintSha256(pemToDer(root.certPem)));
    expect(ca.configured!.serialHex).toBe(serialHex(parseCertificate(pemToDer(leaf.certPem))));
    expect(ca.configured!.chainDer.map((d) => d.equals(pemToDer(root.certPem)))).toEqual([true]);
  });
});
