import { csrfSync } from 'csrf-sync';
import type { NextFunction, Request, Response } from 'express';

// Synchroniser-token protection for cookie sessions: the token lives in the session and must come back in
// the X-CSRF-Token header on every change. Token-authenticated scripts carry no cookies and are exempt.
const { csrfSynchronisedProtection, generateToken } = csrfSync({
  getTokenFromRequest: (req) => req.headers['x-csrf-token'] as string | undefined,
});

export const csrfTokenFor = (req: Request) => generateToken(req);

export function csrfGuard(req: Request, res: Response, next: NextFunction) {
  if (['GET', 'HEAD', 'OPTIONS'].includes(req.method)) return next();
  if (req.actor?.via === 'token') return next();
  if (!req.actor) return next(); // unauthenticated requests are refused by the route itself (401)
  return csrfSynchronisedProtection(req, res, next);
}
