// Benchmark: render a typical certificate (3 pages, 400-point series, 16 ADEV points) and sign it at PAdES
// B-LTA (RSA-3072 CAdES signature, two RFC 3161 time-stamps from the local TSA, DSS), then verify it offline. Run with `npx tsx tests/bench/certificate.bench.ts`;
// prints figures, never fails on time. Storage is not included.
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { signPades } from '../../server/certificates/pdf/pades';
import { renderCertificatePdf } from '../../server/certificates/pdf/render-certificate';
import { verifySignedPdf } from '../../server/certificates/pdf/verify-pdf';
import { pemToDer } from '../../server/certificates/pki/der';
import { createCertificate, createCrl } from '../../server/certificates/pki/x509';
import { startFakeTsa } from '../../server/dev/fake-tsa';
import { sampleSnapshot } from '../unit/certificates/fixtures/sample-snapshot';

const dir = mkdtempSync(path.join(tmpdir(), 'chronolevel-bench-'));
const tsa = await startFakeTsa({ port: 0, keysDir: path.join(dir, 'tsa') });
const root = createCertificate({ subject: { commonName: 'Bench Root CA', organization: 'Bench institute' }, profile: { kind: 'root-ca' } });
const leaf = createCertificate({ subject: { commonName: 'Bench signing', organization: 'Bench institute' }, profile: { kind: 'document-signing' }, issuer: root });
const material = {
  signer: { keyPem: leaf.keyPem, certificate: pemToDer(leaf.certPem), chain: [pemToDer(root.certPem)] },
  tsaUrl: tsa.url,
  validationData: async (tsaCerts: Buffer[]) => ({
    certificates: [pemToDer(leaf.certPem), pemToDer(root.certPem), ...tsaCerts, pemToDer(tsa.rootCertPem)],
    crls: [await createCrl({ issuer: root, crlNumber: 1, thisUpdate: new Date(), validityDays: 7, revoked: [] })],
  }),
};
const anchors = { instituteRoots: [pemToDer(root.certPem)], tsaRoots: [pemToDer(tsa.rootCertPem)] };
const snapshot = sampleSnapshot();
const signOptions = { reason: 'Certificate issue', location: 'Bench', name: 'Bench signer' };

// Warm-up: font parsing, JIT.
for (let i = 0; i < 3; i++) await signPades(await renderCertificatePdf(snapshot), material, signOptions);

const runs = 20;
const render: number[] = [];
const sign: number[] = [];
const total: number[] = [];
const verify: number[] = [];
let bytes = 0;
for (let i = 0; i < runs; i++) {
  const t0 = performance.now();
  const pdf = await renderCertificatePdf(snapshot);
  const t1 = performance.now();
  const signed = await signPades(pdf, material, signOptions);
  const t2 = performance.now();
  const result = await verifySignedPdf(signed, anchors);
  const t3 = performance.now();
  if (result.status !== 'valid') throw new Error(`bench certificate did not verify: ${result.reason}`);
  render.push(t1 - t0);
  sign.push(t2 - t1);
  total.push(t2 - t0);
  verify.push(t3 - t2);
  bytes = signed.length;
}
await tsa.close();
rmSync(dir, { recursive: true, force: true });

const median = (xs: number[]) => [...xs].sort((a, b) => a - b)[Math.floor(xs.length / 2)];
console.log(`certificate render: median ${median(render).toFixed(1)} ms (${runs} runs)`);
console.log(`certificate sign (PAdES B-LTA: CAdES RSA-3072 + signature time-stamp + DSS + document time-stamp, local TSA over HTTP): median ${median(sign).toFixed(1)} ms`);
console.log(`certificate render + sign: median ${median(total).toFixed(1)} ms, signed file ${(bytes / 1024).toFixed(1)} KiB`);
console.log(`certificate verify: median ${median(verify).toFixed(1)} ms`);
