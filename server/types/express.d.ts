import type { Actor } from '../auth/actor';

declare global {
  namespace Express {
    interface Request {
      actor?: Actor | null;
      id?: string;
    }
  }
}

declare module 'express-session' {
  interface SessionData {
    csrfToken?: string;
  }
}

export {};
