import type { NextFunction, Request, Response } from 'express';
import type { Logger } from 'pino';
import { AppError } from './errors';

/** The one place errors become responses: RFC 9457 problem+json, never a stack trace. */
export function problemHandler(logger: Logger) {
  return (err: unknown, req: Request, res: Response, _next: NextFunction) => {
    void _next;
    let status = 500;
    let body: Record<string, unknown>;
    const e = err as { status?: number; statusCode?: number; type?: string; message?: string; code?: string };
    if (err instanceof AppError) {
      status = err.status;
      body = { type: `https://chronolevel.invalid/problems/${err.code}`, title: err.title, status, detail: err.message, code: err.code, ...err.extra };
    } else if (e?.type === 'entity.too.large' || e?.code === 'LIMIT_FILE_SIZE') {
      status = 413;
      body = { type: 'https://chronolevel.invalid/problems/payload-too-large', title: 'Payload too large', status, detail: 'The request body is larger than allowed.', code: 'payload-too-large' };
    } else if (e?.type === 'entity.parse.failed') {
      status = 400;
      body = { type: 'https://chronolevel.invalid/problems/invalid-input', title: 'Invalid input', status, detail: 'The request body is not valid JSON.', code: 'invalid-input', issues: [{ path: 'body', message: 'malformed JSON' }] };
    } else if (e?.code === 'EBADCSRFTOKEN' || (e?.message ?? '').toLowerCase().includes('csrf')) {
      status = 403;
      body = { type: 'https://chronolevel.invalid/problems/csrf', title: 'Request forgery check failed', status, detail: 'Send the X-CSRF-Token header from /api/v1/me with every change.', code: 'csrf' };
    } else {
      logger.error({ err, requestId: req.id }, 'unhandled error');
      body = { type: 'https://chronolevel.invalid/problems/internal', title: 'Internal error', status, detail: 'Something went wrong on the server. Quote the request id when reporting it.', code: 'internal' };
    }
    body.instance = req.originalUrl;
    body.requestId = req.id;
    res.status(status).type('application/problem+json').send(JSON.stringify(body));
  };
}
