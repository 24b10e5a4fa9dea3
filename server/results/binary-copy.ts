import type { Duplex } from 'node:stream';
import type pg from 'pg';

// Reading a series' samples with COPY … TO STDOUT (FORMAT binary), decoded as the bytes arrive from the socket.
// PostgreSQL sends every row as its own CopyData message (5 bytes of framing for 31 bytes of row), so for 10⁷ rows the
// per-message cost dominates: here the framing (PostgreSQL docs, "Frontend/Backend Protocol", COPY Operations and
// Message Formats) and the rows (COPY, "Binary Format") are decoded in one loop over each socket chunk, straight into
// preallocated columns; only the few bytes of a message or row cut by a chunk boundary are copied.

export type SeriesColumns = { epochMjd: Float64Array; y: Float64Array; valid: Uint8Array };

const COPY_SIGNATURE = Buffer.from('PGCOPY\n\xff\r\n\0', 'latin1');
const ROW_BYTES = 31; // int16 field count, then (int32 length + value) for float8, float8, bool
const HEADER_BYTES = 19; // signature, int32 flags, int32 header-extension length

/**
 * Incremental parser of PostgreSQL's binary COPY output of (float8, float8, bool) rows: byte ranges are parsed as
 * they arrive into columns sized from the expected row count (grown by doubling if more come), so a series of 10⁷
 * rows never exists twice in memory. A header or row cut between two ranges is carried over in a small buffer.
 */
export function createBinaryCopyReader(expectedRows = 0) {
  let cap = Math.max(expectedRows, 256);
  let epochMjd = new Float64Array(cap);
  let y = new Float64Array(cap);
  let valid = new Uint8Array(cap);
  let n = 0;
  let headerRead = false;
  let ended = false;
  // bytes of a header or row cut by the end of a range
  let carry = Buffer.alloc(64);
  let carryLen = 0;
  const grow = () => {
    cap *= 2;
    const e2 = new Float64Array(cap); e2.set(epochMjd); epochMjd = e2;
    const y2 = new Float64Array(cap); y2.set(y); y = y2;
    const v2 = new Uint8Array(cap); v2.set(valid); valid = v2;
  };
  // a row of another layout: kept to be thrown by finish (never from inside a socket handler), later bytes dropped
  let bad: Error | null = null;
  /** Decodes the row at byte o of view (which must hold ROW_BYTES from o). */
  const row = (view: DataView, o: number) => {
    if (view.getInt16(o) !== 3 || view.getInt32(o + 2) !== 8 || view.getInt32(o + 14) !== 8 || view.getInt32(o + 26) !== 1) {
      bad ??= new Error('unexpected row layout in COPY stream');
      return;
    }
    if (n === cap) grow();
    epochMjd[n] = view.getFloat64(o + 6);
    y[n] = view.getFloat64(o + 18);
    valid[n] = view.getUint8(o + 30);
    n++;
  };
  /** Bytes the unit being carried needs in all (header, trailer or row), as far as the carried bytes tell. */
  const carryNeed = (): number => {
    if (!headerRead) return carryLen < HEADER_BYTES ? HEADER_BYTES : HEADER_BYTES + extensionAt(new DataView(carry.buffer, carry.byteOffset, carryLen), 0);
    if (carryLen < 2) return 2;
    return carry.readInt16BE(0) === -1 ? 2 : ROW_BYTES;
  };
  /** Handles a complete header, trailer or row held in carry. */
  const fromCarry = () => {
    const view = new DataView(carry.buffer, carry.byteOffset, carryLen);
    if (!headerRead) readHeader(carry.subarray(0, carryLen));
    else if (view.getInt16(0) === -1) ended = true;
    else row(view, 0);
    carryLen = 0;
  };
  const readHeader = (h: Buffer) => {
    if (!h.subarray(0, 11).equals(COPY_SIGNATURE)) throw new Error('not a binary COPY stream');
    headerRead = true;
  };
  /** The header-extension length at o, refused when negative (it would move the parse backwards). */
  const extensionAt = (view: DataView, o: number): number => {
    const ext = view.getInt32(o + 15);
    if (ext < 0) throw new Error('not a binary COPY stream');
    return ext;
  };
  /** Parses buf[start, end); view is a DataView over the whole of buf. */
  const pushRange = (buf: Buffer, view: DataView, start: number, end: number): void => {
    if (bad) return;
    let o = start;
    while (carryLen > 0 && o < end && !ended) {
      const need = carryNeed();
      const take = Math.min(need - carryLen, end - o);
      if (carryLen + take > carry.length) {
        const bigger = Buffer.alloc(Math.max(2 * carry.length, carryLen + take));
        carry.copy(bigger, 0, 0, carryLen);
        carry = bigger;
      }
      buf.copy(carry, carryLen, o, o + take);
      carryLen += take;
      o += take;
      if (carryLen === need && carryNeed() === need) fromCarry();
    }
    if (!headerRead && o < end && carryLen === 0) {
      if (end - o >= HEADER_BYTES && end - o >= HEADER_BYTES + extensionAt(view, o)) {
        readHeader(buf.subarray(o, end));
        o += HEADER_BYTES + extensionAt(view, o);
      }
    }
    if (headerRead) {
      while (!ended && o + 2 <= end) {
        if (view.getInt16(o) === -1) {
          ended = true;
          o += 2;
          break;
        }
        if (o + ROW_BYTES > end) break;
        row(view, o);
        o += ROW_BYTES;
      }
    }
    if (ended || o >= end) return;
    // the start of a unit cut by the end of the range
    if (end - o > carry.length) carry = Buffer.alloc(2 * (end - o));
    buf.copy(carry, 0, o, end);
    carryLen = end - o;
    if (carryNeed() === carryLen) fromCarry();
  };
  return {
    pushRange,
    /** The fast path of createCopyOutParser: a whole row per message while between rows (header read, nothing carried). */
    wholeRows: { rowBytes: ROW_BYTES, ready: () => headerRead && carryLen === 0 && !ended && !bad, row } satisfies WholeRows,
    push(chunk: Buffer): void {
      if (ended) return;
      pushRange(chunk, new DataView(chunk.buffer, chunk.byteOffset, chunk.byteLength), 0, chunk.length);
    },
    get ended() {
      return ended;
    },
    finish(): SeriesColumns {
      if (bad) throw bad;
      if (!ended && carryLen > 0) throw new Error('the COPY stream ended inside a row');
      return { epochMjd: epochMjd.subarray(0, n), y: y.subarray(0, n), valid: valid.subarray(0, n) };
    },
  };
}

/** Parses a whole binary COPY output of (float8, float8, bool) rows at once. */
export function parseBinaryCopy(buf: Buffer): SeriesColumns {
  const r = createBinaryCopyReader(Math.floor(buf.length / ROW_BYTES));
  r.push(buf);
  return r.finish();
}

// backend message codes (PostgreSQL docs, "Message Formats")
const COPY_DATA = 0x64; // 'd'
const COPY_DONE = 0x63; // 'c'
const COPY_OUT_RESPONSE = 0x48; // 'H'
const PARAMETER_STATUS = 0x53; // 'S'
const NOTICE_RESPONSE = 0x4e; // 'N'
const NOTIFICATION_RESPONSE = 0x41; // 'A'

/** A fast path for CopyData messages that each hold exactly one row of `rowBytes`, taken while `ready()` says so. */
export interface WholeRows {
  rowBytes: number;
  ready(): boolean;
  row(view: DataView, o: number): void;
}

/**
 * The backend messages of a COPY TO STDOUT, chunk by chunk: CopyData payloads go to `data` (as ranges of the chunk,
 * never copied), CopyOutResponse and the asynchronous messages that may come in between (ParameterStatus, Notice,
 * Notification) are skipped. `parse` answers null while the copy goes on, or, at CopyDone or at any other message
 * (an ErrorResponse, say), the bytes from there on, which belong to the ordinary message handling again. With
 * `whole`, a run of CopyData messages of one row each is decoded in place without going through `data`.
 */
export function createCopyOutParser(data: (buf: Buffer, view: DataView, start: number, end: number) => void, whole?: WholeRows) {
  let payloadLeft = 0; // bytes of the current message still to come
  let inCopyData = false;
  const head = Buffer.alloc(5); // a message header cut by a chunk boundary
  let headLen = 0;
  let done = false;
  return {
    parse(chunk: Buffer): Buffer | null {
      if (done) return chunk;
      const view = new DataView(chunk.buffer, chunk.byteOffset, chunk.byteLength);
      const len = chunk.length;
      let o = 0;
      while (o < len) {
        if (payloadLeft > 0) {
          const take = Math.min(payloadLeft, len - o);
          if (inCopyData) data(chunk, view, o, o + take);
          o += take;
          payloadLeft -= take;
          continue;
        }
        if (whole && headLen === 0 && whole.ready()) {
          // the usual case: one CopyData message per row, whole in this chunk
          const size = whole.rowBytes;
          const step = size + 5;
          const lengthField = size + 4;
          while (o + step <= len && chunk[o] === COPY_DATA && view.getUint32(o + 1) === lengthField) {
            whole.row(view, o + 5);
            o += step;
          }
          if (o >= len) break;
        }
        let code: number;
        let length: number;
        if (headLen === 0) {
          // a message starts here: anything but the copy's own messages goes back to the ordinary handling
          code = chunk[o];
          if (!isCopyCode(code)) return finish(chunk.subarray(o));
          if (len - o < 5) {
            chunk.copy(head, 0, o, len);
            headLen = len - o;
            break;
          }
          length = view.getUint32(o + 1);
          o += 5;
        } else {
          const take = Math.min(5 - headLen, len - o);
          chunk.copy(head, headLen, o, o + take);
          headLen += take;
          o += take;
          if (headLen < 5) break;
          headLen = 0;
          code = head[0];
          length = head.readUInt32BE(1);
        }
        payloadLeft = length - 4;
        inCopyData = code === COPY_DATA;
        if (code === COPY_DONE) return finish(chunk.subarray(o));
      }
      return null;
    },
  };
  function finish(rest: Buffer): Buffer {
    done = true;
    return rest;
  }
}

function isCopyCode(code: number): boolean {
  return code === COPY_DATA || code === COPY_DONE || code === COPY_OUT_RESPONSE || code === PARAMETER_STATUS || code === NOTICE_RESPONSE || code === NOTIFICATION_RESPONSE;
}

type PgConnection = { stream: Duplex; query(text: string): void };

/**
 * A query for pg's client.query(): runs `COPY (…) TO STDOUT (FORMAT binary)` of (float8, float8, bool) rows and
 * decodes them while they stream in; `columns` resolves when the server has finished (ReadyForQuery) and rejects on a
 * server error, a broken connection or an unexpected row layout. While the copy runs it reads the socket itself
 * (the connection's own message handler is set aside and given back, with the unread bytes, at CopyDone or at any
 * other message).
 */
export class BinarySamplesCopy {
  readonly columns: Promise<SeriesColumns>;
  private resolve!: (c: SeriesColumns) => void;
  private reject!: (e: Error) => void;
  private settled = false;
  private failure: Error | null = null;
  private readonly reader;
  private readonly parser;

  constructor(private readonly text: string, expectedRows: number) {
    this.columns = new Promise((res, rej) => {
      this.resolve = res;
      this.reject = rej;
    });
    this.columns.catch(() => undefined); // a rejection is the caller's to see through `columns`
    this.reader = createBinaryCopyReader(expectedRows);
    this.parser = createCopyOutParser((buf, view, start, end) => {
      if (this.failure || this.reader.ended) return;
      try {
        this.reader.pushRange(buf, view, start, end);
      } catch (e) {
        this.failure = e as Error; // the rest of the stream is read and dropped, so the connection stays usable
      }
    }, this.reader.wholeRows);
  }

  submit(connection: pg.Connection): void {
    const con = connection as unknown as PgConnection;
    const stream = con.stream;
    const handlers = stream.listeners('data') as ((b: Buffer) => void)[];
    if (handlers.length !== 1) throw new Error('unexpected pg connection: one data handler expected');
    const handler = handlers[0];
    stream.removeListener('data', handler);
    stream.pause();
    const onReadable = () => {
      let chunk: Buffer | null;
      while ((chunk = stream.read() as Buffer | null) !== null) {
        const rest = this.parser.parse(chunk);
        if (rest) {
          stream.removeListener('readable', onReadable);
          stream.on('data', handler);
          if (rest.length > 0) handler(rest);
          // bytes already buffered in the stream reach the handler once it flows again
          process.nextTick(() => stream.resume());
          return;
        }
      }
    };
    stream.on('readable', onReadable);
    con.query(this.text);
  }

  handleError(err: Error): void {
    this.settle(err);
  }

  handleCommandComplete(): void {}

  handleReadyForQuery(): void {
    if (this.failure) return this.settle(this.failure);
    try {
      this.settle(null, this.reader.finish());
    } catch (e) {
      this.settle(e as Error);
    }
  }

  private settle(err: Error | null, columns?: SeriesColumns): void {
    if (this.settled) return;
    this.settled = true;
    if (err) this.reject(err);
    else this.resolve(columns!);
  }
}
