// Benchmark: render a typical certificate (3 pages, 400-point series, 16 ADEV points) and sign it
// with an RSA-3072 institute P12, then verify it. Run with `npx tsx tests/bench/certificate.bench.ts`;
// prints figures, never fails on time. Storage is not included.
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { renderCertificatePdf } from '../../server/certificates/pdf/render-certificate';
import { ensureInstituteSigningIdentity, signPdf } from '../../server/certificates/pdf/signing';
import { verifySignedPdf } from '../../server/certificates/pdf/verify-pdf';
import { sampleSnapshot } from '../unit/certificates/fixtures/sample-snapshot';

const dir = mkdtempSync(path.join(tmpdir(), 'chronolevel-bench-'));
const identity = await ensureInstituteSigningIdentity(dir, { commonName: 'Bench institute', organization: 'Bench institute' });
const snapshot = sampleSnapshot();
const signOptions = { reason: 'Certificate issue', location: 'Bench', name: 'Bench signer' };

// Warm-up: font parsing, JIT.
for (let i = 0; i < 3; i++) await signPdf(await renderCertificatePdf(snapshot), identity, signOptions);

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
  const signed = await signPdf(pdf, identity, signOptions);
  const t2 = performance.now();
  const result = await verifySignedPdf(signed, identity.certificatePem);
  const t3 = performance.now();
  if (result.status !== 'valid') throw new Error(`bench certificate did not verify: ${result.reason}`);
  render.push(t1 - t0);
  sign.push(t2 - t1);
  total.push(t2 - t0);
  verify.push(t3 - t2);
  bytes = signed.length;
}
rmSync(dir, { recursive: true, force: true });

const median = (xs: number[]) => [...xs].sort((a, b) => a - b)[Math.floor(xs.length / 2)];
console.log(`certificate render: median ${median(render).toFixed(1)} ms (${runs} runs)`);
console.log(`certificate sign (placeholder + RSA-3072 CMS): median ${median(sign).toFixed(1)} ms`);
console.log(`certificate render + sign: median ${median(total).toFixed(1)} ms, signed file ${(bytes / 1024).toFixed(1)} KiB`);
console.log(`certificate verify: median ${median(verify).toFixed(1)} ms`);
