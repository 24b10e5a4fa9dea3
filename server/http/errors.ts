// Typed errors thrown by services and routers; rendered once as RFC 9457 problem+json.
export type FieldIssue = { path: string; message: string; line?: number; column?: string };

export class AppError extends Error {
  constructor(
    readonly status: number,
    readonly code: string,
    readonly title: string,
    message: string,
    readonly extra: Record<string, unknown> = {},
  ) {
    super(message);
  }
}

export class Invalid extends AppError {
  constructor(message: string, readonly issues: FieldIssue[] = [], extra: Record<string, unknown> = {}) {
    super(400, 'invalid-input', 'Invalid input', message, { ...extra, issues });
  }
}
export class Unauthenticated extends AppError {
  constructor(message = 'Sign in or send a valid API token.') {
    super(401, 'unauthenticated', 'Not signed in', message);
  }
}
export class Forbidden extends AppError {
  constructor(message = 'Your role or institute does not allow this.') {
    super(403, 'forbidden', 'Not allowed', message);
  }
}
export class NotFound extends AppError {
  constructor(what = 'Resource') {
    super(404, 'not-found', 'Not found', `${what} was not found.`);
  }
}
export class Conflict extends AppError {
  constructor(message: string, extra: Record<string, unknown> = {}) {
    super(409, 'conflict', 'Conflict', message, extra);
  }
}
export class PayloadTooLarge extends AppError {
  constructor(limitBytes: number) {
    super(413, 'payload-too-large', 'Payload too large', `The request exceeds the limit of ${limitBytes} bytes.`, { limitBytes });
  }
}
export class Unavailable extends AppError {
  constructor(message: string) {
    super(503, 'unavailable', 'Service unavailable', message);
  }
}
