import { describe, expect, it } from 'vitest';
import { defaultRetryPolicy, retryDelayMs } from '../../../server/mail/outbox';

// "Equal jitter" backoff: half of min(cap, base·2^(n−1)) fixed plus a uniformly random other half
// (M. Brooker, "Exponential Backoff And Jitter", AWS Architecture Blog, 2015, section "Adding Jitter").
describe('mail retry delay', () => {
  const p = defaultRetryPolicy;
  it('doubles from the base and stays within [ceiling/2, ceiling]', () => {
    expect(retryDelayMs(1, p, () => 0)).toBe(15_000);
    expect(retryDelayMs(1, p, () => 1)).toBe(30_000);
    expect(retryDelayMs(4, p, () => 0)).toBe(120_000); // 30 s · 2³ / 2
    expect(retryDelayMs(4, p, () => 1)).toBe(240_000);
  });
  it('is capped at one hour however many tries failed', () => {
    expect(retryDelayMs(8, p, () => 1)).toBe(3_600_000); // 30 s · 2⁷ = 3840 s > cap
    expect(retryDelayMs(10_000, p, () => 1)).toBe(3_600_000);
    expect(retryDelayMs(10_000, p, () => 0)).toBe(1_800_000);
  });
  it('a 3-day give-up time allows many more than ten tries', () => {
    let t = 0;
    let n = 0;
    while (t < p.giveUpAfterMs) t += retryDelayMs(++n, p, () => 1);
    expect(n).toBeGreaterThan(70);
  });
});
