import crypto from 'node:crypto';
import forge from 'node-forge';

/** A fresh RSA key (Node's fast generator) and a self-signed X.509 certificate for it (node-forge). */
export function createSelfSignedCertificate(opts: { commonName: string; organization: string; days?: number; bits?: number }) {
  const { privateKey, publicKey } = crypto.generateKeyPairSync('rsa', { modulusLength: opts.bits ?? 2048 });
  const keyPem = privateKey.export({ type: 'pkcs8', format: 'pem' }).toString();
  const pubPem = publicKey.export({ type: 'spki', format: 'pem' }).toString();
  const cert = forge.pki.createCertificate();
  cert.publicKey = forge.pki.publicKeyFromPem(pubPem);
  cert.serialNumber = '01' + crypto.randomBytes(8).toString('hex');
  cert.validity.notBefore = new Date(Date.now() - 60_000);
  cert.validity.notAfter = new Date(Date.now() + (opts.days ?? 3650) * 86_400_000);
  const attrs = [
    { name: 'commonName', value: opts.commonName },
    { name: 'organizationName', value: opts.organization },
  ];
  cert.setSubject(attrs);
  cert.setIssuer(attrs);
  cert.sign(forge.pki.privateKeyFromPem(keyPem) as forge.pki.rsa.PrivateKey, forge.md.sha256.create());
  return { keyPem, certPem: forge.pki.certificateToPem(cert) };
}

export function pemBody(pem: string): string {
  return pem.replace(/-----(BEGIN|END) [A-Z ]+-----/g, '').replace(/\s+/g, '');
}
