import { describe, expect, it } from 'vitest';
import { deploymentsOverlap, siteDuring } from '../../../shared/deployments';

// Interval rules of deployments (common practice for half-open time intervals [arrival, departure)).
const deployments = [
  { siteId: 'bay', arrivedAt: '2026-03-30T08:00:00Z', departedAt: '2026-04-27T07:00:00Z' },
  { siteId: 'harbour', arrivedAt: '2026-04-28T16:00:00Z', departedAt: '2026-05-29T08:00:00Z' },
  { siteId: 'bay', arrivedAt: '2026-06-01T15:00:00Z', departedAt: null },
];

describe('siteDuring', () => {
  it('gives the site of the one deployment covering the whole period', () => {
    expect(siteDuring(deployments, '2026-04-06T00:00:00Z', '2026-04-17T00:00:00Z')).toEqual({ ok: true, siteId: 'bay' });
    expect(siteDuring(deployments, '2026-05-06T00:00:00Z', '2026-05-20T00:00:00Z')).toEqual({ ok: true, siteId: 'harbour' });
    // an open deployment (still there) covers any later period
    expect(siteDuring(deployments, '2026-06-08T00:00:00Z', '2027-06-19T00:00:00Z')).toEqual({ ok: true, siteId: 'bay' });
    // a period exactly equal to the deployment is covered
    expect(siteDuring(deployments, '2026-04-28T16:00:00Z', '2026-05-29T08:00:00Z')).toEqual({ ok: true, siteId: 'harbour' });
  });

  it('says the clock moved when the period spans two deployments or runs past one', () => {
    const spans = siteDuring(deployments, '2026-04-20T00:00:00Z', '2026-05-05T00:00:00Z');
    expect(spans).toMatchObject({ ok: false, reason: 'moved', siteIds: ['bay', 'harbour'] });
    expect(siteDuring(deployments, '2026-05-20T00:00:00Z', '2026-05-31T00:00:00Z')).toMatchObject({ ok: false, reason: 'moved', siteIds: ['harbour'] });
    // the same site twice with a transport in between is still a move
    expect(siteDuring(deployments, '2026-04-20T00:00:00Z', '2026-06-10T00:00:00Z')).toMatchObject({ ok: false, reason: 'moved' });
  });

  it('says the clock was not deployed when no deployment touches the period', () => {
    expect(siteDuring(deployments, '2026-01-01T00:00:00Z', '2026-02-01T00:00:00Z')).toMatchObject({ ok: false, reason: 'not-deployed' });
    expect(siteDuring(deployments, '2026-05-29T09:00:00Z', '2026-06-01T12:00:00Z')).toMatchObject({ ok: false, reason: 'not-deployed' });
    expect(siteDuring([], '2026-01-01T00:00:00Z', '2026-02-01T00:00:00Z')).toMatchObject({ ok: false, reason: 'not-deployed' });
  });
});

describe('deploymentsOverlap', () => {
  it('treats a departure and the next arrival at the same instant as not overlapping', () => {
    const a = { siteId: 'x', arrivedAt: '2026-01-01T00:00:00Z', departedAt: '2026-02-01T00:00:00Z' };
    expect(deploymentsOverlap(a, { siteId: 'y', arrivedAt: '2026-02-01T00:00:00Z', departedAt: null })).toBe(false);
    expect(deploymentsOverlap(a, { siteId: 'y', arrivedAt: '2026-01-31T00:00:00Z', departedAt: null })).toBe(true);
    expect(deploymentsOverlap({ ...a, departedAt: null }, { siteId: 'y', arrivedAt: '2027-01-01T00:00:00Z', departedAt: '2027-02-01T00:00:00Z' })).toBe(true);
  });
});
