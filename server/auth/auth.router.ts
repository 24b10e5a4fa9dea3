import express, { type Request, type Response, type NextFunction } from 'express';
import passport from 'passport';
import type { Strategy as SamlStrategy } from '@node-saml/passport-saml';
import fs from 'node:fs';
import { Unauthenticated } from '../http/errors';
import { safeReturnPath } from './return-path';

/** Sign-in through the institute's identity provider (SAML 2.0, HTTP-Redirect out, HTTP-POST back) and sign-out. */
export function createAuthRouter(strategy: SamlStrategy, spCertPem?: string) {
  const router = express.Router();
  router.get('/auth/saml/login', (req, res, next) => {
    const returnTo = safeReturnPath(req.query.returnTo);
    passport.authenticate('saml', { failureRedirect: '/signed-out', additionalParams: { RelayState: returnTo } } as never)(req, res, next);
  });
  router.post('/auth/saml/callback', express.urlencoded({ extended: false, limit: '512kb' }), (req: Request, res: Response, next: NextFunction) => {
    passport.authenticate('saml', { session: false }, (err: Error | null, user: { id: string } | false) => {
      if (err || !user) {
        next(new Unauthenticated(`Sign-in refused: ${err?.message ?? 'no user'}`));
        return;
      }
      req.login(user, (loginErr) => {
        if (loginErr) return next(loginErr);
        const relay = safeReturnPath(req.body?.RelayState);
        res.redirect(303, relay);
      });
    })(req, res, next);
  });
  router.get('/auth/saml/metadata', (_req, res) => {
    res.type('application/samlmetadata+xml').send(strategy.generateServiceProviderMetadata(null, spCertPem ?? null));
  });
  router.post('/auth/logout', (req, res, next) => {
    req.logout((err) => {
      if (err) return next(err);
      req.session.destroy(() => {
        res.clearCookie('chronolevel.sid');
        res.status(204).end();
      });
    });
  });
  return router;
}

export function readOptionalFile(path: string | undefined): string | undefined {
  return path && fs.existsSync(path) ? fs.readFileSync(path, 'utf8') : undefined;
}
