import crypto from 'node:crypto';
import fs from 'node:fs';
import express, { type Request, type Response, type NextFunction } from 'express';
import passport from 'passport';
import type { Strategy as SamlStrategy } from '@node-saml/passport-saml';
import type { DataSource } from 'typeorm';
import type { AppConfig } from '../config';
import { Unauthenticated } from '../http/errors';
import { noteWrite } from '../db/replicas';
import { decodeSamlResponse, inspectSamlResponse, reasonFromLibraryError, SAML_LIMITS, SamlRefusal, scanSamlXml } from './saml-guard';
import { callbackUrlOf, idpIssuerOf, newRequestId, pendingRequestId } from './saml';

// The AuthnRequest id is bound to the browser that asked for it (a signed, HttpOnly cookie set with the
// redirect to the identity provider): a response answering any other request is refused, so an attacker
// cannot sign a victim's browser into the attacker's account (login CSRF; OASIS SAML 2.0 Profiles §4.1.4.3
// InResponseTo, and common practice for binding it to the user agent).
export const BINDING_COOKIE = 'chronolevel.saml_req';
const BINDING_PATH = '/auth/saml';
const BINDING_TTL_MS = 10 * 60 * 1000;

const mac = (secret: string, id: string) => crypto.createHmac('sha256', secret).update(`saml-request:${id}`).digest('base64url');

function readCookie(req: Request, name: string): string | null {
  for (const part of (req.headers.cookie ?? '').split(';')) {
    const i = part.indexOf('=');
    if (i > 0 && part.slice(0, i).trim() === name) return decodeURIComponent(part.slice(i + 1).trim());
  }
  return null;
}

/** The request id this browser started, if its cookie carries a valid MAC. */
export function boundRequestId(req: Request, secret: string): string | null {
  const v = readCookie(req, BINDING_COOKIE);
  if (!v) return null;
  const dot = v.lastIndexOf('.');
  if (dot <= 0) return null;
  const id = v.slice(0, dot);
  const expected = Buffer.from(mac(secret, id));
  const given = Buffer.from(v.slice(dot + 1));
  return expected.length === given.length && crypto.timingSafeEqual(expected, given) ? id : null;
}

const SIGN_IN_FAILED_PAGE = `<!doctype html><html lang="en"><head><meta charset="utf-8"><title>Sign-in failed — Chronolevel</title>
<style>body{font-family:system-ui,sans-serif;background:#f6f2e9;color:#1d2b33;margin:0;padding:3rem 1rem}main{max-width:34rem;margin:auto;background:#fff;border:1px solid #ddd3bf;border-radius:10px;padding:1.5rem 2rem}h1{font-size:1.3rem;margin:0 0 .8rem}a{color:#2f5f73}</style>
</head><body><main><h1>Sign-in failed.</h1><p>Chronolevel could not accept the answer from your institute's sign-in service.</p>
<p><a href="/auth/saml/login">Try again</a> or <a href="/">return to the start page</a>. If it keeps failing, tell your administrator the time of this attempt.</p></main></body></html>`;
import { safeReturnPath } from './return-path';

/** Sign-in through the institute's identity provider (SAML 2.0, HTTP-Redirect out, HTTP-POST back) and sign-out. */
export function createAuthRouter(strategy: SamlStrategy, ctx: { config: AppConfig; dataSource: DataSource }, spCertPem?: string) {
  const { config, dataSource } = ctx;
  // Used by instance, not by a global name, so several apps in one process (tests) never share a strategy.
  const saml = strategy as unknown as passport.Strategy;
  const router = express.Router();
  const secure = config.publicUrl.startsWith('https://');
  // The callback is a cross-site POST from the identity provider: in production (https) the cookie must be
  // SameSite=None; Secure to come along. Over plain http only loopback is served, where both are same-site.
  const cookieOptions = { httpOnly: true, secure, sameSite: secure ? ('none' as const) : ('lax' as const), path: BINDING_PATH };
  const callbackUrl = callbackUrlOf(config);
  const idpIssuer = idpIssuerOf(config);

  router.get('/auth/saml/login', (req, res, next) => {
    const returnTo = safeReturnPath(req.query.returnTo);
    const requestId = newRequestId();
    res.cookie(BINDING_COOKIE, `${requestId}.${mac(config.sessionSecret, requestId)}`, { ...cookieOptions, maxAge: BINDING_TTL_MS });
    pendingRequestId.run(requestId, () => {
      passport.authenticate(saml, { failureRedirect: '/signed-out', additionalParams: { RelayState: returnTo } } as never)(req, res, next);
    });
  });

  const body = express.urlencoded({ extended: false, limit: SAML_LIMITS.bodyBytes, parameterLimit: 10 });
  router.post('/auth/saml/callback', (req: Request, res: Response, next: NextFunction) => {
    const bound = boundRequestId(req, config.sessionSecret);
    // Every refusal: a generic 401 for the browser, the reason in the security log, the pending request spent.
    const refuse = (e: SamlRefusal) => {
      req.log.warn({ securityEvent: 'saml.refused', reason: e.reason, detail: e.detail.slice(0, 300), ip: req.ip }, 'sign-in refused');
      const done = () => {
        // A browser (the identity provider's auto-submitted form) gets a readable page; API clients problem+json.
        if (req.accepts(['application/json', 'text/html']) === 'text/html') {
          res.status(401).type('html').send(SIGN_IN_FAILED_PAGE);
          return;
        }
        next(new Unauthenticated('Sign-in failed.'));
      };
      if (bound) dataSource.query('DELETE FROM saml_request WHERE id = $1', [bound]).then(done, done);
      else done();
    };
    body(req, res, (bodyErr?: unknown) => {
      if (bodyErr) {
        const tooLarge = (bodyErr as { type?: string }).type === 'entity.too.large';
        // Stop reading an oversize body; the answer goes out at once.
        if (tooLarge) res.setHeader('connection', 'close');
        return refuse(new SamlRefusal(tooLarge ? 'oversize' : 'body-malformed', tooLarge ? `body over ${SAML_LIMITS.bodyBytes} bytes` : String((bodyErr as Error).message)));
      }
      try {
        const xml = decodeSamlResponse(req.body?.SAMLResponse);
        scanSamlXml(xml); // linear, before any DOM or XPath
        const inspected = inspectSamlResponse(xml, { destination: callbackUrl, idpIssuer });
        if (!bound) throw new SamlRefusal('request-not-bound', 'no sign-in was started in this browser');
        if (bound !== inspected.inResponseTo) throw new SamlRefusal('request-not-bound', 'InResponseTo is not the request this browser started');
      } catch (e) {
        if (e instanceof SamlRefusal) return refuse(e);
        return next(e);
      }
      passport.authenticate(saml, { session: false }, (err: Error | null, user: { id: string } | false) => {
        if (err || !user) return refuse(err instanceof SamlRefusal ? err : new SamlRefusal(err ? reasonFromLibraryError(err) : 'saml-invalid', err?.message ?? 'no user'));
        req.login(user, (loginErr) => {
          if (loginErr) return next(loginErr);
          // The absolute lifetime counts from here; stored before the browser is sent on, so its next request sees it.
          req.session.signedInAt = Date.now();
          req.session.save((saveErr) => {
            if (saveErr) return next(saveErr);
            // with read replicas: this person's next reads see the account sign-in may have just made or updated
            noteWrite(dataSource, user.id).then(() => {
              res.clearCookie(BINDING_COOKIE, cookieOptions);
              req.log.info({ securityEvent: 'saml.accepted', userId: user.id }, 'signed in');
              const relay = safeReturnPath(req.body?.RelayState);
              res.redirect(303, relay);
            }, next);
          });
        });
      })(req, res, next);
    });
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
