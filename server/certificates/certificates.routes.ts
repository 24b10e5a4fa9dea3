import busboy from 'busboy';
import type { Request } from 'express';
import {
  campaignIdParamsSchema, certificateDetailSchema, certificateListQuerySchema, certificateNumberParamsSchema, certificateSummarySchema,
  reissueCertificateSchema, revokeCertificateSchema, VERIFY_UPLOAD_LIMIT_BYTES, verificationResultSchema, verifyByNumberQuerySchema,
} from '../../shared/certificate-registry';
import { issueCertificateSchema } from '../../shared/campaigns';
import { anyCertificateSnapshotSchema } from '../../shared/certificates';
import { idParamsSchema, pageOf } from '../../shared/http';
import { certificateRequestAcceptedSchema, certificateRequestProgressSchema } from '../../shared/jobs';
import { Invalid, PayloadTooLarge } from '../http/errors';
import { route } from '../http/route';
import { createCertificateRequests } from './certificate-requests';
import { createCertificatesService } from './certificates.service';
import { createVerificationService } from './verification.service';

// Certificate routes: issue, reissue, withdraw (coordinator), read and download (certificates:read), and the
// public verification used by anyone who was sent a certificate.

/** Reads the single uploaded file into memory; certificates are small, and the limit is enforced while streaming. */
function readUploadedPdf(req: Request, limitBytes: number): Promise<Buffer> {
  return new Promise((resolve, reject) => {
    let bb: busboy.Busboy;
    try {
      bb = busboy({ headers: req.headers, limits: { files: 1, fileSize: limitBytes, fields: 5 } });
    } catch {
      reject(new Invalid('Send the certificate as multipart/form-data with a field named "file".', [{ path: 'body.file', message: 'expected a multipart upload' }]));
      return;
    }
    let file: Buffer | null = null;
    let failure: Error | null = null;
    bb.on('file', (_name, stream) => {
      const chunks: Buffer[] = [];
      stream.on('data', (c: Buffer) => chunks.push(c));
      stream.on('limit', () => {
        failure = new PayloadTooLarge(limitBytes);
        stream.resume();
      });
      stream.on('end', () => {
        if (!failure && file === null) file = Buffer.concat(chunks);
      });
    });
    bb.on('error', (e) => reject(new Invalid(`The upload could not be read: ${(e as Error).message}`, [{ path: 'body.file', message: 'malformed multipart body' }])));
    bb.on('close', () => {
      if (failure) return reject(failure);
      if (!file || file.length === 0) return reject(new Invalid('No file was uploaded.', [{ path: 'body.file', message: 'attach the certificate PDF' }]));
      resolve(file);
    });
    req.pipe(bb);
  });
}

/** Public verification, by file or by number: 30 checks a minute per address, counted in PostgreSQL. */
// Verification is rate-limited per caller by the middleware in server/http/rate-limits.ts (RATE_LIMIT_VERIFY_PER_MINUTE).
export const certificateRoutes = [
  route({
    method: 'post', path: '/api/v1/campaigns/:id/certificates',
    summary: 'Ask for the certificate of an accepted campaign (comment required; review rules checked now). 202 with the request; a worker renders, time-stamps and signs it; Location: its progress',
    tag: 'certificates', permission: 'certificates:issue', params: campaignIdParamsSchema, body: issueCertificateSchema, response: certificateRequestAcceptedSchema, raw: true,
    handler: async ({ actor, params, body, res, deps }) => {
      const out = await createCertificateRequests(deps.dataSource, deps.config).requestIssue(actor, params.id, body);
      res.status(202).location(out.progressUrl).json(out);
    },
  }),
  route({
    method: 'post', path: '/api/v1/chains/:id/certificates',
    summary: 'Ask for the certificate of a calibration chain whose campaigns are all accepted or certified (comment required; rules checked now). 202 with the request; a worker renders, time-stamps and signs it; Location: its progress',
    tag: 'certificates', permission: 'certificates:issue', params: idParamsSchema, body: issueCertificateSchema, response: certificateRequestAcceptedSchema, raw: true, problems: [409],
    handler: async ({ actor, params, body, res, deps }) => {
      const out = await createCertificateRequests(deps.dataSource, deps.config).requestChainIssue(actor, params.id, body);
      res.status(202).location(out.progressUrl).json(out);
    },
  }),
  route({
    method: 'get', path: '/api/v1/certificate-requests/:id/progress', summary: 'How far an issue or reissue request got (stage, fraction; the certificate number when done)',
    tag: 'certificates', permission: 'certificates:issue', params: idParamsSchema, response: certificateRequestProgressSchema,
    handler: ({ actor, params, deps }) => createCertificateRequests(deps.dataSource, deps.config).progress(actor, params.id),
  }),
  route({
    method: 'post', path: '/api/v1/certificates/verify', summary: 'Verify a certificate file (public; multipart field "file")',
    tag: 'certificates', permission: 'public', multipart: true, response: verificationResultSchema,
    handler: async ({ req, deps }) => {
      return createVerificationService(deps.dataSource, deps.config).verifyFile(await readUploadedPdf(req, VERIFY_UPLOAD_LIMIT_BYTES));
    },
  }),
  route({
    method: 'get', path: '/api/v1/certificates/verify', summary: 'Verify a certificate by its number and the SHA-256 of its file (public)',
    tag: 'certificates', permission: 'public', query: verifyByNumberQuerySchema, response: verificationResultSchema,
    handler: async ({ query, deps }) => {
      return createVerificationService(deps.dataSource, deps.config).verifyNumber(query.number, query.sha256);
    },
  }),
  route({
    method: 'get', path: '/api/v1/certificates', summary: 'Certificates of campaigns and of calibration chains (filter by kind, state, institute, campaign, chain, issue date)',
    tag: 'certificates', permission: 'certificates:read', query: certificateListQuerySchema, response: pageOf(certificateSummarySchema),
    handler: ({ actor, query, deps }) => createCertificatesService(deps.dataSource, deps.config).list(actor, query),
  }),
  route({
    method: 'get', path: '/api/v1/certificates/:number', summary: 'One certificate with its revisions',
    tag: 'certificates', permission: 'certificates:read', params: certificateNumberParamsSchema, response: certificateDetailSchema,
    handler: ({ actor, params, deps }) => createCertificatesService(deps.dataSource, deps.config).get(actor, params.number),
  }),
  route({
    method: 'get', path: '/api/v1/certificates/:number/pdf', summary: 'The signed PDF as issued',
    tag: 'certificates', permission: 'certificates:read', params: certificateNumberParamsSchema, raw: true,
    handler: async ({ actor, params, res, deps }) => {
      const file = await createCertificatesService(deps.dataSource, deps.config).pdf(actor, params.number);
      res
        .status(200)
        .type('application/pdf')
        .set('content-disposition', `attachment; filename="${file.number}.pdf"`)
        .set('x-content-sha256', file.sha256)
        .set('cache-control', 'private, no-store')
        .send(file.pdf);
    },
  }),
  route({
    method: 'get', path: '/api/v1/certificates/:number/snapshot', summary: 'The frozen data the certificate was rendered from (JSON)',
    tag: 'certificates', permission: 'certificates:read', params: certificateNumberParamsSchema, response: anyCertificateSnapshotSchema,
    handler: ({ actor, params, deps }) => createCertificatesService(deps.dataSource, deps.config).snapshot(actor, params.number),
  }),
  route({
    method: 'post', path: '/api/v1/certificates/:number/reissue',
    summary: 'Ask for the next revision after a correction (202 with the request; a worker issues it and marks the current one replaced; Location: its progress)',
    tag: 'certificates', permission: 'certificates:issue', params: certificateNumberParamsSchema, body: reissueCertificateSchema,
    response: certificateRequestAcceptedSchema, raw: true,
    handler: async ({ actor, params, body, res, deps }) => {
      const out = await createCertificateRequests(deps.dataSource, deps.config).requestReissue(actor, params.number, body.reason, body.justification);
      res.status(202).location(out.progressUrl).json(out);
    },
  }),
  route({
    method: 'post', path: '/api/v1/certificates/:number/revoke', summary: 'Withdraw a certificate (reason required)',
    tag: 'certificates', permission: 'certificates:issue', params: certificateNumberParamsSchema, body: revokeCertificateSchema,
    response: certificateSummarySchema,
    handler: ({ actor, params, body, deps }) => createCertificatesService(deps.dataSource, deps.config).revoke(actor, params.number, body.reason),
  }),
];
