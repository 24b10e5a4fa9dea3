import { describe, expect, it } from 'vitest';
import { updateLinkSchema, updateSiteSchema } from '../../shared/registry';

// PATCH semantics (RFC 5789, common practice for JSON APIs): a field left out of the body stays unchanged,
// so the update schemas must not fill in the create schemas' defaults.
describe('update schemas', () => {
  it('leave absent fields absent instead of applying defaults', () => {
    expect(updateSiteSchema.parse({ name: 'Clock hall east' })).toEqual({ name: 'Clock hall east' });
    expect(updateLinkSchema.parse({ fibreLengthKm: 12.5 })).toEqual({ fibreLengthKm: 12.5 });
  });
  it('still validate the fields that are sent', () => {
    expect(updateSiteSchema.safeParse({ coordinates: [1] }).success).toBe(false);
  });
});
