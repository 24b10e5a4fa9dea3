import { describe, expect, it } from 'vitest';
import { loadConfig } from '../../server/config';
import { armFaultPoint, faultPoint } from '../../server/dev/fault-point';

// The kill harness's fault points are test-only: the configuration drops them under NODE_ENV=production, and an
// unarmed point returns at once (common practice for test hooks; no published source).
const base = { DATABASE_URL: 'postgres://x@127.0.0.1/x', SESSION_SECRET: 'a-session-secret-of-length' };

describe('fault points', () => {
  it('are dropped from a production configuration and kept elsewhere', () => {
    expect(loadConfig({ ...base, NODE_ENV: 'production', CHRONOLEVEL_FAULT_POINT: 'before-copy' }).faultPoint).toBeUndefined();
    expect(loadConfig({ ...base, NODE_ENV: 'test', CHRONOLEVEL_FAULT_POINT: 'before-copy' }).faultPoint).toBe('before-copy');
  });

  it('do nothing unless armed for that point, and nothing under NODE_ENV=production even when armed', async () => {
    armFaultPoint(undefined);
    await expect(faultPoint('before-copy')).resolves.toBeUndefined();
    armFaultPoint('mid-copy');
    await expect(faultPoint('before-copy')).resolves.toBeUndefined(); // armed for another point
    const env = process.env.NODE_ENV;
    process.env.NODE_ENV = 'production';
    try {
      armFaultPoint('before-copy');
      await expect(faultPoint('before-copy')).resolves.toBeUndefined();
    } finally {
      process.env.NODE_ENV = env;
      armFaultPoint(undefined);
    }
  });
});
