import { mkdir, readFile, writeFile } from 'node:fs/promises';
import http from 'node:http';
import type { AddressInfo } from 'node:net';
import path from 'node:path';
import * as asn1js from 'asn1js';
import * as pkijs from 'pkijs';
import { createSignedData, signedDataToDer } from '../certificates/pki/cms';
import { OID, pemToDer, randomPositiveInteger, sha256, toArrayBuffer } from '../certificates/pki/der';
import { TSA_REQUEST_LIMIT_BYTES } from '../certificates/pki/tsp';
import { createCertificate, createCrl, type KeyAndCertificate } from '../certificates/pki/x509';

// A local time-stamping authority for development and tests, answering RFC 3161 requests over HTTP (3.4):
// POST / with application/timestamp-query, reply application/timestamp-reply. Its signing certificate
// (critical id-kp-timeStamping, RFC 3161 2.3) is issued by its own root, whose certificate is at /root.pem
// and whose CRL is at /crl. Configure TSA_URL to use a real authority instead.

/** TSA policy (RFC 3161 2.4.2 `policy`): a UUID-based OID under 2.25 (ITU-T X.667), so no registration is needed. */
export const LOCAL_TSA_POLICY = `2.25.${BigInt('0x5b8e0c7a3f2d4e61a9c4d2b07e13f6a8').toString()}`;

interface TsaKeys {
  root: KeyAndCertificate;
  tsa: KeyAndCertificate;
  url: string;
}

async function loadOrCreateKeys(dir: string, url: string): Promise<TsaKeys> {
  const file = path.join(dir, 'tsa-keys.json');
  try {
    const keys = JSON.parse(await readFile(file, 'utf8')) as TsaKeys;
    if (keys.url === url) return keys;
  } catch {
    // first start, or a new address: make new keys below
  }
  const root = createCertificate({ subject: { commonName: 'Local Time-Stamping Root (development)', organization: 'Chronolevel development services' }, profile: { kind: 'root-ca' }, bits: 2048, validityYears: 20 });
  const tsa = createCertificate({
    subject: { commonName: 'Local Time-Stamping Unit (development)', organization: 'Chronolevel development services' },
    profile: { kind: 'time-stamping', crlUrl: `${url}/crl` }, issuer: root, bits: 2048, validityYears: 10,
  });
  const keys = { root, tsa, url };
  await mkdir(dir, { recursive: true, mode: 0o700 });
  await writeFile(file, JSON.stringify(keys), { mode: 0o600 });
  return keys;
}

export async function timeStampResponse(keys: Pick<TsaKeys, 'root' | 'tsa'>, request: Buffer, now = new Date()): Promise<Buffer> {
  let req: pkijs.TimeStampReq;
  try {
    req = pkijs.TimeStampReq.fromBER(toArrayBuffer(request));
  } catch {
    return rejection(2 /* badDataFormat, RFC 3161 2.4.2 PKIFailureInfo */, 'the request is not a TimeStampReq');
  }
  if (req.messageImprint.hashAlgorithm.algorithmId !== OID.sha256 || req.messageImprint.hashedMessage.valueBlock.valueHexView.byteLength !== 32) {
    return rejection(0 /* badAlg */, 'only SHA-256 imprints are accepted');
  }
  const serial = randomPositiveInteger(12);
  const genTime = new Date(Math.floor(now.getTime() / 1000) * 1000);
  const tstInfo = new pkijs.TSTInfo({
    version: 1,
    policy: LOCAL_TSA_POLICY,
    messageImprint: req.messageImprint,
    serialNumber: new asn1js.Integer({ valueHex: toArrayBuffer(serial) }),
    genTime,
    accuracy: new pkijs.Accuracy({ seconds: 1 }),
    ...(req.nonce ? { nonce: req.nonce } : {}),
  });
  const eContent = Buffer.from(tstInfo.toSchema().toBER(false));
  const signedData = await createSignedData({
    signer: { keyPem: keys.tsa.keyPem, certificate: pemToDer(keys.tsa.certPem), chain: req.certReq ? [pemToDer(keys.root.certPem)] : [] },
    digest: sha256(eContent),
    eContentType: OID.tstInfo,
    eContent,
  });
  if (!req.certReq) signedData.certificates = undefined;
  const token = signedDataToDer(signedData);
  const resp = new pkijs.TimeStampResp({
    status: new pkijs.PKIStatusInfo({ status: 0 }),
    timeStampToken: new pkijs.ContentInfo({ schema: asn1js.fromBER(toArrayBuffer(token)).result }),
  });
  return Buffer.from(resp.toSchema().toBER(false));
}

function rejection(failBit: number, text: string): Buffer {
  const bits = new Uint8Array([0x80 >> failBit]);
  const resp = new pkijs.TimeStampResp({
    status: new pkijs.PKIStatusInfo({
      status: 2,
      statusStrings: [new asn1js.Utf8String({ value: text })],
      failInfo: new asn1js.BitString({ valueHex: toArrayBuffer(bits), unusedBits: 7 - failBit }),
    }),
  });
  return Buffer.from(resp.toSchema().toBER(false));
}

export async function startFakeTsa(opts: { port: number; host?: string; keysDir: string }) {
  const host = opts.host ?? '127.0.0.1';
  // Filled once the port is known: the TSA certificate names its CRL address on this server.
  const state: { keys?: TsaKeys } = {};
  let crlNumber = Math.floor(Date.now() / 1000);
  const server = http.createServer((req, res) => {
    void (async () => {
      const keys = state.keys;
      if (!keys) throw new Error('not ready');
      if (req.method === 'GET' && req.url === '/root.pem') {
        res.writeHead(200, { 'content-type': 'application/x-pem-file' }).end(keys.root.certPem);
        return;
      }
      if (req.method === 'GET' && req.url === '/crl') {
        const crl = await createCrl({ issuer: keys.root, crlNumber: crlNumber++, thisUpdate: new Date(Date.now() - 1000), validityDays: 7, revoked: [] });
        res.writeHead(200, { 'content-type': 'application/pkix-crl' }).end(crl);
        return;
      }
      if (req.method !== 'POST' || (req.headers['content-type'] ?? '').split(';')[0].trim() !== 'application/timestamp-query') {
        res.writeHead(405, { 'content-type': 'text/plain' }).end('POST an application/timestamp-query (RFC 3161 3.4)\n');
        return;
      }
      const chunks: Buffer[] = [];
      let size = 0;
      for await (const chunk of req) {
        size += (chunk as Buffer).length;
        if (size > TSA_REQUEST_LIMIT_BYTES) {
          res.writeHead(413).end();
          req.destroy();
          return;
        }
        chunks.push(chunk as Buffer);
      }
      const reply = await timeStampResponse(keys, Buffer.concat(chunks));
      res.writeHead(200, { 'content-type': 'application/timestamp-reply' }).end(reply);
    })().catch((err: Error) => {
      if (!res.headersSent) res.writeHead(500, { 'content-type': 'text/plain' }).end(`${err.message}\n`);
    });
  });
  await new Promise<void>((resolve, reject) => {
    server.once('error', reject);
    server.listen(opts.port, host, () => resolve());
  });
  const url = `http://${host}:${(server.address() as AddressInfo).port}`;
  const keys = await loadOrCreateKeys(opts.keysDir, url);
  state.keys = keys;
  await writeFile(path.join(opts.keysDir, 'tsa-root.pem'), keys.root.certPem);
  return {
    url,
    rootCertPem: keys.root.certPem,
    rootCertFile: path.join(opts.keysDir, 'tsa-root.pem'),
    close: () => new Promise<void>((resolve) => server.close(() => resolve())),
  };
}
