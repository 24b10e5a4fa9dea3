import { describe, expect, it } from 'vitest';
import { createCopyOutParser } from '../../../server/results/binary-copy';
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

// Backend messages around it, after PostgreSQL 15 documentation, "Frontend/Backend Protocol", §55.2.6 COPY Operations
// and §55.7 Message Formats: a code byte, an int32 length counting itself, the payload. The server sends
// CopyOutResponse ('H'), each row as one CopyData ('d'), CopyDone ('c'), then CommandComplete ('C') and
// ReadyForQuery ('Z'), which belong to the ordinary message handling; a NoticeResponse ('N') may come in between.
function message(code: string, payload: Buffer): Buffer {
  const head = Buffer.alloc(5);
  head[0] = code.charCodeAt(0);
  head.writeUInt32BE(payload.length + 4, 1);
  return Buffer.concat([head, payload]);
}

/** The messages of a COPY of `rows` as the server frames it: the file header in its own CopyData, then one per row. */
function copyOut(rows: [number, number, boolean][], between: Buffer[] = []): { bytes: Buffer; after: Buffer } {
  const file = copyStream(rows);
  const parts = [message('H', Buffer.from([1, 0, 3, 0, 1, 0, 1, 0, 1]))];
  parts.push(message('d', file.subarray(0, 19)));
  for (let k = 0; k < rows.length; k++) {
    parts.push(message('d', file.subarray(19 + 31 * k, 19 + 31 * (k + 1))));
    if (k === 100) parts.push(...between);
  }
  parts.push(message('d', file.subarray(file.length - 2)), message('c', Buffer.alloc(0)));
  const after = Buffer.concat([message('C', Buffer.from('COPY 500\0')), message('Z', Buffer.from('T'))]);
  return { bytes: Buffer.concat([...parts, after]), after };
}

/** Feeds bytes in pieces of `step` bytes; the columns read and the bytes handed back after the copy. */
function feed(bytes: Buffer, step: number, whole: boolean) {
  const reader = createBinaryCopyReader(7);
  const parser = createCopyOutParser((b, v, s, e) => reader.pushRange(b, v, s, e), whole ? reader.wholeRows : undefined);
  const back: Buffer[] = [];
  for (let o = 0; o < bytes.length; o += step) {
    const rest = parser.parse(bytes.subarray(o, o + step));
    if (rest) back.push(Buffer.from(rest));
    // after the copy every later chunk goes to the ordinary handling (the caller stops calling parse)
    if (back.length) {
      back.push(bytes.subarray(o + step));
      break;
    }
  }
  return { columns: reader.finish(), back: Buffer.concat(back) };
}

describe('COPY TO STDOUT messages read from the socket', () => {
  it('decodes every row whatever the chunk boundaries, skips a notice in between, and hands back what follows CopyDone', () => {
    const notice = message('N', Buffer.from('SNOTICE\0Mhello\0\0'));
    const { bytes, after } = copyOut(rows, [notice]);
    const expected = parseBinaryCopy(copyStream(rows));
    for (const whole of [true, false]) {
      for (const step of [1, 2, 3, 5, 6, 35, 36, 37, 100, 4096, bytes.length]) {
        const { columns, back } = feed(bytes, step, whole);
        expect(Array.from(columns.epochMjd)).toEqual(Array.from(expected.epochMjd));
        expect(Array.from(columns.y)).toEqual(rows.map((r) => r[1]));
        expect(Array.from(columns.valid)).toEqual(rows.map((r) => (r[2] ? 1 : 0)));
        expect(back.equals(after)).toBe(true);
      }
    }
  });

  it('stops at an error from the server and hands it back whole, however the chunks fall', () => {
    const error = message('E', Buffer.from('SERROR\0C22012\0Mdivision by zero\0\0'));
    const ready = message('Z', Buffer.from('E'));
    const { bytes } = copyOut(rows.slice(0, 10));
    // rows, then the error where CopyDone would have been
    const cut = bytes.indexOf(Buffer.from([0x63, 0, 0, 0, 4]));
    const stream = Buffer.concat([bytes.subarray(0, cut), error, ready]);
    for (const step of [1, 4, 5, 36, stream.length]) {
      const reader = createBinaryCopyReader(10);
      const parser = createCopyOutParser((b, v, s, e) => reader.pushRange(b, v, s, e), reader.wholeRows);
      let back: Buffer | null = null;
      for (let o = 0; o < stream.length && !back; o += step) {
        const rest = parser.parse(stream.subarray(o, o + step));
        if (rest) back = Buffer.concat([rest, stream.subarray(o + step)]);
      }
      expect(back?.equals(Buffer.concat([error, ready]))).toBe(true);
      expect(reader.finish().y.length).toBe(10);
    }
  });

  it('keeps a row of another layout for finish to refuse, on the fast path as on the slow one', () => {
    const { bytes } = copyOut(rows.slice(0, 20));
    const odd = Buffer.from(bytes);
    // the int16 field count of the sixth row (message headers 5 bytes; CopyOutResponse 14, file header 24, rows 36)
    odd.writeInt16BE(4, 14 + 24 + 5 * 36 + 5);
    for (const whole of [true, false]) {
      for (const step of [7, odd.length]) {
        expect(() => feed(odd, step, whole)).toThrow(/row layout/);
      }
    }
  });
});
