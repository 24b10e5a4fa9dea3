import busboy from 'busboy';
import type { Request } from 'express';
import { z } from 'zod';
import {
  campaignIdParamsSchema, certificateDetailSchema, certificateListQuerySchema, certificateNumberParamsSchema, certificateSummarySchema,
  reissueCertificateSchema, revokeCertificateSchema, VERIFY_UPLOAD_LIMIT_BYTES, verificationResultSchema, verifyByNumberQuerySchema,
} from '../../shared/certificate-registry';
import { issueCertificateSchema } from '../../shared/campaigns';
import { certificateSnapshotSchema } from '../../shared/certificates';
import { pageOf } from '../../shared/http';
import { Invalid, PayloadTooLarge } from '../http/errors';
import { route } from '../http/route';
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

const issuedResponse = z.object({ created: z.boolean(), certificate: certificateSummarySchema });

/** Public verification, by file or by number: 30 checks a minute per address, counted in PostgreSQL. */
// Verification is rate-limited per caller by the middleware in server/http/rate-limits.ts (RATE_LIMIT_VERIFY_PER_MINUTE).
export const certificateRoutes = [
  route({
    method: 'post', path: '/api/v1/campaigns/:id/certificates', summary: 'Issue the certificate of an accepted campaign (comment required; 201, or 200 with the existing one when nothing changed)',
    tag: 'certificates', permission: 'certificates:issue', params: campaignIdParamsSchema, body: issueCertificateSchema, response: issuedResponse, raw: true,
    handler: async ({ actor, params, body, res, deps }) => {
      const out = await createCertificatesService(deps.dataSource, deps.config).issue(actor, params.id, body);
      res.status(out.created ? 201 : 200).location(`/api/v1/certificates/${out.certificate.number}`).json(out);
    },
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
    method: 'get', path: '/api/v1/certificates', summary: 'Certificates (filter by state, institute, campaign, issue date)',
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
    tag: 'certificates', permission: 'certificates:read', params: certificateNumberParamsSchema, response: certificateSnapshotSchema,
    handler: ({ actor, params, deps }) => createCertificatesService(deps.dataSource, deps.config).snapshot(actor, params.number),
  }),
  route({
    method: 'post', path: '/api/v1/certificates/:number/reissue', summary: 'Issue the next revision after a correction; the current one is marked replaced',
    tag: 'certificates', permission: 'certificates:issue', params: certificateNumberParamsSchema, body: reissueCertificateSchema,
    response: certificateSummarySchema, successStatus: 201,
    handler: ({ actor, params, body, deps }) => createCertificatesService(deps.dataSource, deps.config).reissue(actor, params.number, body.reason, body.justification),
  }),
  route({
    method: 'post', path: '/api/v1/certificates/:number/revoke', summary: 'Withdraw a certificate (reason required)',
    tag: 'certificates', permission: 'certificates:issue', params: certificateNumberParamsSchema, body: revokeCertificateSchema,
    response: certificateSummarySchema,
    handler: ({ actor, params, body, deps }) => createCertificatesService(deps.dataSource, deps.config).revoke(actor, params.number, body.reason),
  }),
];
