import type { NextFunction, Request, Response, Router } from 'express';
import { z } from 'zod';
import type { Actor } from '../auth/actor';
import { authorize, type Permission } from '../auth/permissions';
import type { AppDeps } from '../deps';
import { onDatabase, type DbAccess } from '../db/replicas';
import { Invalid, Unauthenticated } from './errors';
import { JsonText } from './json-text';

type Method = 'get' | 'post' | 'put' | 'patch' | 'delete';

export type RouteContext<B, Q, P> = {
  actor: Actor;
  body: B;
  query: Q;
  params: P;
  req: Request;
  res: Response;
  deps: AppDeps;
};

/**
 * One API route: its contract (zod schemas, shared with the client), the permission it needs and a thin handler
 * that calls one service. The same list feeds Express, the OpenAPI document and the table-driven access tests.
 */
export type RouteSpec<B = unknown, Q = unknown, P = unknown> = {
  method: Method;
  path: string;
  summary: string;
  tag: string;
  permission: Permission | 'public';
  body?: z.ZodType<B>;
  query?: z.ZodType<Q>;
  params?: z.ZodType<P>;
  response?: z.ZodTypeAny;
  successStatus?: number;
  /** the handler writes the response itself (downloads, streams, uploads) */
  raw?: boolean;
  /** request body is not JSON (multipart upload) — documented as such */
  multipart?: boolean;
  /** the text fields of a multipart body (JSON Schema), documented before the file part */
  formFields?: Record<string, Record<string, unknown>>;
  /** further problem statuses the route answers with (409, 413, …), beyond 400/401/403/404 */
  problems?: number[];
  /**
   * Where its queries go when read replicas are configured (docs/decisions/0009-read-replicas.md): 'read' (the
   * default for GET) may use a standby; 'primary' reads on the primary; 'write' (the default for other methods) runs
   * on the primary and keeps the caller's next reads there until a standby has replayed the write.
   */
  db?: DbAccess;
  handler: (ctx: RouteContext<B, Q, P>) => Promise<unknown>;
};

// Helper so each route infers its own body/query/params types.
export function route<B = undefined, Q = undefined, P = undefined>(spec: RouteSpec<B, Q, P>): RouteSpec {
  return spec as unknown as RouteSpec;
}

export function issuesOf(error: z.ZodError, prefix: string) {
  return error.issues.map((i) => ({
    path: [prefix, ...i.path.map(String)].join('.'),
    message: i.message,
  }));
}

function parsePart<T>(schema: z.ZodType<T> | undefined, value: unknown, part: string): T {
  if (!schema) return undefined as T;
  const r = schema.safeParse(value);
  if (!r.success) throw new Invalid(`The request ${part} is not valid.`, issuesOf(r.error, part));
  return r.data;
}

export function mountRoutes(router: Router, routes: RouteSpec[], deps: AppDeps): void {
  for (const spec of routes) {
    router[spec.method](spec.path, async (req: Request, res: Response, next: NextFunction) => {
      try {
        const actor = req.actor ?? null;
        if (spec.permission !== 'public') {
          if (!actor) throw new Unauthenticated();
          authorize(actor, spec.permission);
        }
        const params = parsePart(spec.params, req.params, 'params');
        const query = parsePart(spec.query, req.query, 'query');
        const body = spec.multipart ? undefined : parsePart(spec.body, req.body ?? {}, 'body');
        const access = spec.db ?? (spec.method === 'get' ? 'read' : 'write');
        const result = await onDatabase(deps.dataSource, access, actor?.userId ?? null, () => spec.handler({ actor: actor as Actor, body, query, params, req, res, deps }));
        if (spec.raw) return;
        if (result === undefined) {
          res.status(spec.successStatus ?? 204).end();
          return;
        }
        if (result instanceof JsonText) {
          res.status(spec.successStatus ?? 200).type('application/json').send(result.text);
          return;
        }
        res.status(spec.successStatus ?? 200).json(result);
      } catch (err) {
        next(err);
      }
    });
  }
}
