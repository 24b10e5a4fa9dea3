import { OpenAPIRegistry, OpenApiGeneratorV31 } from '@asteasolutions/zod-to-openapi';
import { problemSchema } from '../../shared/http';
import type { RouteSpec } from './route';

/** Builds the OpenAPI 3.1 document from the same route list Express serves. */
export function buildOpenApi(routes: RouteSpec[], serverUrl: string) {
  const registry = new OpenAPIRegistry();
  registry.registerComponent('securitySchemes', 'apiToken', { type: 'http', scheme: 'bearer', description: 'Personal API token' });
  registry.registerComponent('securitySchemes', 'session', { type: 'apiKey', in: 'cookie', name: 'chronolevel.sid' });
  const problem = { description: 'Problem details (RFC 9457)', content: { 'application/problem+json': { schema: problemSchema } } };
  for (const r of routes) {
    const path = r.path.replace(/:([A-Za-z0-9_]+)/g, '{$1}');
    const request: Record<string, unknown> = {};
    if (r.params) request.params = r.params;
    if (r.query) request.query = r.query;
    if (r.multipart) {
      const fields = r.formFields ?? {};
      const names = Object.keys(fields);
      request.body = {
        description: names.length
          ? `multipart/form-data: the fields ${names.map((n) => `\`${n}\``).join(', ')} first, then the part \`file\` last (the server reads the parts in order and streams the file).`
          : 'multipart/form-data with one part `file`.',
        content: { 'multipart/form-data': { schema: { type: 'object', properties: { ...fields, file: { type: 'string', format: 'binary' } }, required: ['file'] }, encoding: { file: { contentType: 'text/csv, text/plain, application/octet-stream' } } } },
      };
    } else if (r.body) {
      request.body = { content: { 'application/json': { schema: r.body } } };
    }
    registry.registerPath({
      method: r.method,
      path,
      summary: r.summary,
      tags: [r.tag],
      security: r.permission === 'public' ? [] : [{ apiToken: [] }, { session: [] }],
      description: r.permission === 'public' ? 'Public.' : `Needs permission \`${r.permission}\`.`,
      request: request as never,
      responses: {
        [r.successStatus ?? 200]: r.response
          ? { description: 'Success', content: { 'application/json': { schema: r.response } } }
          : { description: 'Success' },
        400: problem,
        401: problem,
        403: problem,
        404: problem,
        ...Object.fromEntries((r.problems ?? []).map((status) => [status, problem])),
      },
    });
  }
  return new OpenApiGeneratorV31(registry.definitions).generateDocument({
    openapi: '3.1.0',
    info: {
      title: 'Chronolevel API',
      version: '1',
      description:
        'Clock comparisons, geopotential and height differences, levelling networks and certificates. Ratios and nominal frequencies travel as decimal strings.',
    },
    servers: [{ url: serverUrl }],
  });
}
