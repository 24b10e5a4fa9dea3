// Benchmark: issuing a certificate end to end inside one PostgreSQL transaction — serial number, snapshot,
// render, PAdES B-LTA signature (RSA-3072 CAdES, signature time-stamp, CRL published, DSS, document time-stamp
// from the local TSA over HTTP), INSERT of PDF + snapshot, audit event and participant mail — as the API does it.
// The campaign/result part of the snapshot comes from the unit-test fixture so the figure isolates the
// certificate work. Run with `npx tsx tests/bench/issue.bench.ts`; prints figures, never fails on time.
import { randomUUID } from 'node:crypto';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
// @ts-expect-error plain ESM helper shared with `npm start`
import { freePort, startCluster } from '../../scripts/lib/postgres.mjs';
import { loadConfig } from '../../server/config';
import { openDatabase } from '../../server/db/data-source';
import { UserEntity } from '../../server/db/entities/core.entities';
import type { CertificateSource } from '../../server/certificates/certificate-source.types';
import { instituteCa } from '../../server/certificates/institute-identity';
import { startFakeTsa } from '../../server/dev/fake-tsa';
import { issueCertificate } from '../../server/certificates/issue';
import { seedDemo } from '../../seeds/demo';
import { sampleSnapshot } from '../unit/certificates/fixtures/sample-snapshot';

const tmp = mkdtempSync(path.join(tmpdir(), 'chronolevel-issue-bench-'));
process.env.PG_FSYNC = 'on';
const cluster = await startCluster({ dataDir: path.join(tmp, 'pg'), port: await freePort(), database: 'bench', log: () => {} });
try {
  const tsa = await startFakeTsa({ port: 0, keysDir: path.join(tmp, 'secrets', 'tsa') });
  const env = { DATABASE_URL: cluster.url, SECRETS_DIR: path.join(tmp, 'secrets'), SESSION_SECRET: 'bench-session-secret-0123456789', LOG_LEVEL: 'silent', TSA_URL: tsa.url, TSA_ROOT_CERT_FILE: tsa.rootCertFile };
  const config = loadConfig(env);
  Object.assign(process.env, { SECRETS_DIR: config.secretsDir, TSA_URL: tsa.url, TSA_ROOT_CERT_FILE: tsa.rootCertFile });
  const t0 = performance.now();
  await instituteCa(config, { commonName: 'Bench', organization: 'Bench' });
  const keyMs = performance.now() - t0;
  const ds = await openDatabase(cluster.url);
  await seedDemo(ds); // also issues the demo certificate when the seeds hold an accepted campaign with series
  const coordinator = await ds.getRepository(UserEntity).findOneByOrFail({ role: 'coordinator' });
  const actor = { userId: coordinator.id, email: coordinator.email, displayName: coordinator.displayName, role: coordinator.role, instituteId: coordinator.instituteId, via: 'token' as const };
  const institutes = await ds.query(`SELECT id FROM institute WHERE kind = 'laboratory' ORDER BY code`);

  const {
    certificateNumber: _n, revision: _r, issueDate: _d, issuingInstitute: _i, auditChainHead: _h, signer: _s, verificationUrl: _v, ...body
  } = sampleSnapshot();
  void [_n, _r, _d, _i, _h, _s, _v];
  const sourceFor = (campaignId: string): CertificateSource => ({
    campaignId, campaignLabel: 'Bench campaign', campaignState: 'accepted', instituteAId: institutes[0].id, instituteBId: institutes[1].id, resultId: null, body,
  });

  const issueOnce = async () => {
    const campaignId = randomUUID();
    const start = performance.now();
    const out = await ds.transaction((manager) =>
      issueCertificate({ manager, config, actor, loadSource: async () => sourceFor(campaignId), markCertified: async () => undefined }, campaignId,
        { comment: 'Bench run: certified as stated.', justification: 'Bench run: exceptions accepted for timing only.' }));
    if (!out.created) throw new Error('bench issue did not create a certificate');
    return { ms: performance.now() - start, bytes: out.row.pdfBytes };
  };
  for (let i = 0; i < 3; i++) await issueOnce(); // warm-up: fonts, JIT, connection pool

  const runs = 20;
  const times: number[] = [];
  let bytes = 0;
  for (let i = 0; i < runs; i++) {
    const r = await issueOnce();
    times.push(r.ms);
    bytes = r.bytes;
  }
  const sorted = [...times].sort((a, b) => a - b);
  const median = sorted[Math.floor(runs / 2)];
  console.log(`institute root CA (first use: RSA-3072 key generation and self-signed root): ${keyMs.toFixed(0)} ms`);
  console.log(`issue certificate (serial + snapshot + render + PAdES B-LTA sign with 2 time-stamps + CRL + store + audit + mail, one transaction): median ${median.toFixed(1)} ms, min ${sorted[0].toFixed(1)} ms, max ${sorted[runs - 1].toFixed(1)} ms (${runs} runs; target < 1000 ms)`);
  console.log(`signed file ${(bytes / 1024).toFixed(1)} KiB`);
  await ds.destroy();
  await tsa.close();
} finally {
  cluster.stop();
  rmSync(tmp, { recursive: true, force: true });
}
