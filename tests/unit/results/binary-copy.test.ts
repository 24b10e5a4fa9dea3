import { describe, expect, it } from 'vitest';
import { createBinaryCopyReader, inEpochOrder, parseBinaryCopy } from '../../../server/results/results.service';

// A binary COPY stream written by hand after PostgreSQL 15 documentation, SQL command COPY, "Binary Format":
// 11-byte signature, int32 flags, int32 header-extension length (+ extension), then per tuple an int16 field count
// and per field an int32 length and the value in network byte order; an int16 −1 ends the stream.
function copyStream(rows: [number, number, boolean][], extension = Buffer.alloc(0)): Buffer {
  const head = Buffer.alloc(19);
  Buffer.from('PGCOPY\n\xff\r\n\0', 'latin1').copy(head, 0);
  head.writeInt32BE(0, 11);
  head.writeInt32BE(extension.length, 15);
  const body = Buffer.alloc(rows.length * 31);
  rows.forEach(([mjd, y, valid], k) => {
    const o = k * 31;
    body.writeInt16BE(3, o);
    body.writeInt32BE(8, o + 2);
    body.writeDoubleBE(mjd, o + 6);
    body.writeInt32BE(8, o + 14);
    body.writeDoubleBE(y, o + 18);
    body.writeInt32BE(1, o + 26);
    body[o + 30] = valid ? 1 : 0;
  });
  const trailer = Buffer.alloc(2);
  trailer.writeInt16BE(-1, 0);
  return Buffer.concat([head, extension, body, trailer]);
}

const rows: [number, number, boolean][] = Array.from({ length: 500 }, (_, i) => [61_000 + i / 86_400, (i - 250) * 1.25e-18, i % 11 !== 0]);

describe('binary COPY reader', () => {
  it('reads every row bit-exactly whatever the chunk boundaries (1 to 40 bytes), with a header extension', () => {
    const buf = copyStream(rows, Buffer.from([1, 2, 3, 4, 5]));
    const whole = parseBinaryCopy(buf);
    expect(whole.epochMjd.length).toBe(500);
    expect(Array.from(whole.y)).toEqual(rows.map((r) => r[1]));
    expect(Array.from(whole.valid)).toEqual(rows.map((r) => (r[2] ? 1 : 0)));
    for (const step of [1, 2, 7, 19, 30, 31, 32, 40]) {
      const reader = createBinaryCopyReader(10); // fewer than the rows: the columns must grow
      for (let o = 0; o < buf.length; o += step) reader.push(buf.subarray(o, o + step));
      const got = reader.finish();
      expect(Array.from(got.epochMjd)).toEqual(Array.from(whole.epochMjd));
      expect(Array.from(got.y)).toEqual(Array.from(whole.y));
      expect(Array.from(got.valid)).toEqual(Array.from(whole.valid));
    }
  });

  it('refuses a stream cut inside a row and a row of another layout', () => {
    const buf = copyStream(rows.slice(0, 3));
    const cut = createBinaryCopyReader(3);
    cut.push(buf.subarray(0, 19 + 31 + 10));
    expect(() => cut.finish()).toThrow(/inside a row/);
    const odd = Buffer.from(buf);
    odd.writeInt16BE(4, 19);
    expect(() => parseBinaryCopy(odd)).toThrow(/row layout/);
  });

  it('returns rows already in epoch order untouched and sorts rows that are not (an unordered scan)', () => {
    const sorted = parseBinaryCopy(copyStream(rows));
    expect(inEpochOrder(sorted)).toBe(sorted);
    const shuffled = [...rows.slice(250), ...rows.slice(0, 250)]; // a scan that started in the middle
    const fixed = inEpochOrder(parseBinaryCopy(copyStream(shuffled)));
    expect(Array.from(fixed.epochMjd)).toEqual(rows.map((r) => r[0]));
    expect(Array.from(fixed.y)).toEqual(rows.map((r) => r[1]));
    expect(Array.from(fixed.valid)).toEqual(rows.map((r) => (r[2] ? 1 : 0)));
  });
});
