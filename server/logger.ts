import pino from 'pino';

export function createLogger(level: string) {
  return pino({ level, base: { service: 'chronolevel' }, redact: ['req.headers.authorization', 'req.headers.cookie'] });
}
