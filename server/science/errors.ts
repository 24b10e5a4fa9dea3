// Typed input error for the science core: callers (services) map it to a 400 problem+json
// with the offending field path. Common practice; no published source needed.

export class ScienceInputError extends Error {
  readonly field: string;

  constructor(field: string, message: string) {
    super(`${field}: ${message}`);
    this.name = 'ScienceInputError';
    this.field = field;
  }
}
