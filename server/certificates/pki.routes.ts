import { z } from 'zod';
import { revokeSigningKeySchema, trustAnchorSchema } from '../../shared/certificate-signature';
import { certificateSnapshotSchema } from '../../shared/certificates';
import { NotFound } from '../http/errors';
import { route } from '../http/route';
import { createPkiService, PKI_PATHS } from './pki.service';

// Public trust material (root CA certificate, CRL, the snapshot schema) and the admin's withdrawal of the signing key.

export const SNAPSHOT_SCHEMA_PATH = '/api/v1/schemas/certificate-snapshot.json';

export function snapshotJsonSchema(publicUrl: string): Record<string, unknown> {
  return {
    $id: `${publicUrl}${SNAPSHOT_SCHEMA_PATH}`,
    title: 'Chronolevel certificate snapshot',
    description: 'The data a certificate was rendered from; embedded in every certificate PDF as <number>.snapshot.json. See docs/formats/certificate-snapshot.md.',
    ...z.toJSONSchema(certificateSnapshotSchema, { target: 'draft-2020-12', io: 'input' }),
  };
}

const withdrawnResponse = z.object({
  serial: z.string(), revokedAt: z.string(), compromisedSince: z.string(), crlNumber: z.number().int().nullable(), affectedCertificates: z.array(z.string()),
});

export const pkiRoutes = [
  route({
    method: 'get', path: '/api/v1/pki/trust-anchor', summary: 'The institute root CA (subject, SHA-256 fingerprint, download and CRL addresses) and the trusted TSA roots (public)',
    tag: 'certificates', permission: 'public', response: trustAnchorSchema,
    handler: ({ deps }) => createPkiService(deps.dataSource, deps.config).trustAnchor(),
  }),
  route({
    method: 'get', path: PKI_PATHS.rootPem, summary: 'The institute root CA certificate, PEM (public)', tag: 'certificates', permission: 'public', raw: true,
    handler: async ({ res, deps }) => {
      const root = await createPkiService(deps.dataSource, deps.config).rootCertificate();
      res.status(200).type('application/x-pem-file').set('content-disposition', 'attachment; filename="institute-root-ca.pem"').send(root.pem);
    },
  }),
  route({
    method: 'get', path: PKI_PATHS.rootDer, summary: 'The institute root CA certificate, DER (public)', tag: 'certificates', permission: 'public', raw: true,
    handler: async ({ res, deps }) => {
      const root = await createPkiService(deps.dataSource, deps.config).rootCertificate();
      res.status(200).type('application/pkix-cert').set('content-disposition', 'attachment; filename="institute-root-ca.cer"').send(root.der);
    },
  }),
  route({
    method: 'get', path: PKI_PATHS.crl, summary: 'The newest CRL of the institute root CA, DER (public; RFC 5280)', tag: 'certificates', permission: 'public', raw: true,
    handler: async ({ res, deps }) => {
      const crl = await createPkiService(deps.dataSource, deps.config).crl();
      if (!crl) throw new NotFound('CRL (none published yet; one is published with the first certificate)');
      res.status(200).type('application/pkix-crl').set('cache-control', 'public, max-age=3600').set('last-modified', crl.thisUpdate.toUTCString()).send(crl.der);
    },
  }),
  route({
    method: 'get', path: SNAPSHOT_SCHEMA_PATH, summary: 'JSON Schema of the certificate snapshot embedded in every certificate (public)', tag: 'certificates', permission: 'public', raw: true,
    handler: async ({ res, deps }) => {
      res.status(200).type('application/schema+json').json(snapshotJsonSchema(deps.config.publicUrl));
    },
  }),
  route({
    method: 'post', path: '/api/v1/pki/signing-key/revoke', summary: 'Withdraw the certificate-signing key after a compromise: publishes a CRL and marks every certificate signed with it (admin)',
    tag: 'certificates', permission: 'signing-keys:revoke', body: revokeSigningKeySchema, response: withdrawnResponse,
    handler: ({ actor, body, deps }) => createPkiService(deps.dataSource, deps.config).withdrawSigningKey(actor, body),
  }),
];
