import { describe, expect, it } from 'vitest';
import { randomPositiveInteger } from '../../../server/certificates/pki/der';

// Random serial numbers and nonces must be DER INTEGERs as they stand: positive, and without a padding byte. ITU-T
// X.690 §8.3.2: the first nine bits of the content are not all zero (and not all one); RFC 5280 §4.1.2.2: a
// certificate serial is a positive integer. One in 256 draws of the earlier code began 0x00 then a byte below 0x80,
// which OpenSSL refuses ("illegal padding") in a time-stamp token's serial.
describe('randomPositiveInteger', () => {
  it('gives minimal positive DER content in 100 000 draws', () => {
    let padded = 0;
    let negative = 0;
    for (let i = 0; i < 100_000; i++) {
      const b = randomPositiveInteger(i % 2 ? 8 : 16);
      expect(b.length).toBe(i % 2 ? 8 : 16);
      if (b[0] === 0x00 && b[1] < 0x80) padded++;
      if (b[0] >= 0x80) negative++;
    }
    expect({ padded, negative }).toEqual({ padded: 0, negative: 0 });
  });
});
