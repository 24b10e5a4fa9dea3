import crypto from 'node:crypto';
import fs from 'node:fs';
import path from 'node:path';
import connectPgSimple from 'connect-pg-simple';
import express, { type NextFunction, type Request, type Response } from 'express';
import session from 'express-session';
import helmet from 'helmet';
import passport from 'passport';
import { pinoHttp } from 'pino-http';
import pg from 'pg';
import { createAuthRouter } from './auth/auth.router';
import { csrfGuard } from './auth/csrf';
import { createSamlStrategy } from './auth/saml';
import { absoluteSessionLifetime } from './auth/session-policy';
import type { AppDeps } from './deps';
import { NotFound } from './http/errors';
import { buildOpenApi } from './http/openapi';
import { problemHandler } from './http/problem';
import { mountRateLimits } from './http/rate-limits';
import { armFaultPoint } from './dev/fault-point';
import { mountRoutes } from './http/route';
import { apiRoutes } from './routes';
import { attachTokenCache, TokenCache } from './tokens/token-cache';
import { actorFromToken } from './tokens/tokens.service';
import { findActorByUserId } from './users/users.service';

/**
 * One concise line per API request when it finishes: method, path (never the query string, which could hold a
 * secret), status, milliseconds and the actor's id. No headers; nothing for static assets, /api/health or /api/live.
 */
export function requestLine(logger: AppDeps['logger']) {
  return (req: Request, res: Response, next: NextFunction) => {
    const p = req.originalUrl.split('?')[0];
    if (!(p.startsWith('/api/') || p.startsWith('/auth/')) || p === '/api/health' || p === '/api/live') return next();
    const t0 = process.hrtime.bigint();
    res.once('finish', () => {
      const ms = Math.round(Number(process.hrtime.bigint() - t0) / 1e5) / 10;
      logger.info({ reqId: req.id, method: req.method, path: p, status: res.statusCode, ms, actor: req.actor?.userId ?? null }, 'request');
    });
    next();
  };
}

/** The API token of an `Authorization: Bearer …` header, or null when the request carries none. */
function bearerSecret(req: Request): string | null {
  const auth = req.headers.authorization;
  return auth?.startsWith('Bearer ') ? auth.slice(7).trim() : null;
}

/** Builds the Express app without listening; the server process and the tests both use it. */
export function createApp(deps: AppDeps) {
  const { config, dataSource, logger } = deps;
  armFaultPoint(config.faultPoint);
  const app = express();
  app.disable('x-powered-by');
  if (config.trustProxy) app.set('trust proxy', 1);

  app.use(
    pinoHttp({
      logger,
      genReqId: (req, res) => {
        const id = crypto.randomUUID();
        res.setHeader('x-request-id', id);
        return id;
      },
      // req.log (security events) carries only the request id; the one line per request is written below.
      autoLogging: false,
      quietReqLogger: true,
    }),
  );
  app.use(requestLine(logger));
  app.use(
    helmet({
      contentSecurityPolicy: {
        directives: {
          'default-src': ["'self'"],
          'img-src': ["'self'", 'data:', 'blob:'],
          'style-src': ["'self'", "'unsafe-inline'"],
          'form-action': ["'self'", config.idpUrl],
          'upgrade-insecure-requests': null,
        },
      },
    }),
  );

  const pool = new pg.Pool({ connectionString: config.databaseUrl, max: 5 });
  const PgStore = connectPgSimple(session);
  // The browser session (cookie, store, passport, absolute lifetime) is skipped for API requests that carry an API
  // token: the token alone decides who calls (an invalid token is no caller, never a fall-back to the cookie), and
  // parsing the cookie, generating a session object and loading the store cost a tenth of such a request's CPU.
  const sessionMiddleware = [
    session({
      name: 'chronolevel.sid',
      store: new PgStore({ pool, tableName: 'session', createTableIfMissing: false, pruneSessionInterval: 15 * 60 }),
      secret: config.sessionSecret,
      resave: false,
      saveUninitialized: false,
      rolling: true,
      proxy: config.trustProxy,
      cookie: {
        httpOnly: true,
        sameSite: 'lax',
        secure: config.publicUrl.startsWith('https://'),
        maxAge: config.sessionIdleMs,
      },
    }),
    passport.initialize(),
    passport.session(),
    absoluteSessionLifetime(config.sessionAbsoluteMs),
  ];
  app.use((req: Request, res: Response, next: NextFunction) => {
    if (req.path.startsWith('/api/') && bearerSecret(req) !== null) return next();
    let i = 0;
    const step = (err?: unknown) => {
      if (err || i === sessionMiddleware.length) return next(err);
      sessionMiddleware[i++](req, res, step);
    };
    step();
  });
  app.locals.closeSessionPool = () => pool.end();

  // Resolved API tokens, kept by this process while it listens for their changes (server/tokens/token-cache.ts);
  // stopped with the data source.
  const tokenCache = new TokenCache({
    connectionString: (dataSource.options as { url?: string }).url ?? config.databaseUrl,
    onState: (listening, err) => (listening ? logger.info('token cache on (listening for token changes)') : logger.warn({ err }, 'token cache off until the listening connection is back')),
  });
  attachTokenCache(dataSource, tokenCache);
  app.locals.tokenCache = tokenCache;
  app.locals.tokenCacheReady = tokenCache.start();

  const strategy = createSamlStrategy(config, dataSource);
  passport.serializeUser((user, done) => done(null, (user as { id: string }).id));
  passport.deserializeUser((id: string, done) => done(null, { id }));

  // Resolve the caller once: API token first (scripts), then the browser session.
  app.use(async (req: Request, _res: Response, next: NextFunction) => {
    try {
      const secret = bearerSecret(req);
      if (secret !== null) {
        req.actor = await actorFromToken(dataSource, secret, tokenCache);
      } else if (req.user && (req.user as { id?: string }).id) {
        req.actor = await findActorByUserId(dataSource, (req.user as { id: string }).id);
      } else {
        req.actor = null;
      }
      next();
    } catch (e) {
      next(e);
    }
  });

  mountRateLimits(app, deps);
  app.use('/auth/logout', csrfGuard);
  app.use(createAuthRouter(strategy, { config, dataSource }));

  const api = express.Router();
  // The stability calculator takes up to MAX_STABILITY_SAMPLES (2e5) numbers as JSON (~5 MB at 24 characters each).
  api.use('/api/v1/calc/stability', express.json({ limit: '6mb' }));
  api.use(express.json({ limit: '20mb' }));
  api.use(csrfGuard);
  mountRoutes(api, apiRoutes, deps);
  app.get('/api/v1/openapi.json', (_req, res) => {
    res.json(buildOpenApi(apiRoutes, config.publicUrl));
  });
  app.use(api);
  app.use(['/api', '/auth'], (_req: Request, _res: Response, next: NextFunction) => next(new NotFound('Route')));

  // The built client (Vite) with history-API fallback.
  const clientDir = path.resolve('dist/client');
  if (fs.existsSync(path.join(clientDir, 'index.html'))) {
    app.use(express.static(clientDir, { index: false, maxAge: '1h' }));
    app.get(/^\/(?!api\/|auth\/).*/, (_req, res) => res.sendFile(path.join(clientDir, 'index.html')));
  }

  app.use(problemHandler(logger));
  return app;
}
