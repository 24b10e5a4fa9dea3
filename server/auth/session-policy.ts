import type { NextFunction, Request, Response } from 'express';

// Session lifetimes (OWASP ASVS 4.0.3 V3.3.2, level 2: re-authentication after 12 hours of use or 30 minutes
// of inactivity). The idle timeout (SESSION_IDLE_MINUTES) is the rolling cookie/store expiry set in app.ts; the absolute lifetime
// (SESSION_ABSOLUTE_HOURS) is counted from the sign-in instant stored in the session and is not extended by activity.
declare module 'express-session' {
  interface SessionData {
    /** Epoch milliseconds of the SAML sign-in that created this session. */
    signedInAt?: number;
  }
}

/** Ends a session older than the absolute lifetime (or one without a sign-in instant) before the caller is resolved. */
export function absoluteSessionLifetime(absoluteMs: number) {
  return (req: Request, res: Response, next: NextFunction) => {
    const user = req.user as { id?: string } | undefined;
    if (!user?.id || !req.session) return next();
    const at = req.session.signedInAt;
    if (typeof at === 'number' && Date.now() - at <= absoluteMs) return next();
    req.log?.info({ securityEvent: 'session.expired', userId: user.id, reason: typeof at === 'number' ? 'absolute-lifetime' : 'no-sign-in-instant' }, 'session ended');
    req.session.destroy(() => {
      req.user = undefined;
      res.clearCookie('chronolevel.sid');
      next();
    });
  };
}
