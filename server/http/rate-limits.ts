import type { Express } from 'express';
import type { AppDeps } from '../deps';
import { createRateLimit } from './rate-limit';

// Where the rate limits apply (limits per minute from the configuration, RATE_LIMIT_*): sign-in (per client address),
// public certificate verification (per client address, or user), calculators and uploads (per user). Mounted after the
// caller is resolved and before any body is parsed, so a refused request costs one counter update.
export function mountRateLimits(app: Express, deps: AppDeps): void {
  const { config, dataSource } = deps;
  const l = config.rateLimits;
  const common = { dataSource, durationSeconds: 60, enabled: l.enabled };
  const byAddress = (req: import('express').Request) => `ip:${req.ip ?? req.socket.remoteAddress ?? 'unknown'}`;
  app.use(['/auth/saml/login', '/auth/saml/callback'], createRateLimit({ ...common, keyPrefix: 'sign-in', points: l.signInPerMinute, key: byAddress }));
  app.use('/api/v1/certificates/verify', createRateLimit({ ...common, keyPrefix: 'verify', points: l.verifyPerMinute }));
  app.use('/api/v1/calc', createRateLimit({ ...common, keyPrefix: 'calc', points: l.calcPerMinute }));
  const uploads = createRateLimit({ ...common, keyPrefix: 'uploads', points: l.uploadsPerMinute });
  app.post(['/api/v1/campaigns/:id/uploads', '/api/v1/campaigns/:id/uploads/preview', '/api/v1/network/sections/upload'], uploads);
}
