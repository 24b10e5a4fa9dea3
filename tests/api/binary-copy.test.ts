import type pg from 'pg';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { BinarySamplesCopy } from '../../server/results/binary-copy';
import { createTestApp, type TestApp } from '../helpers/test-app';

// The binary COPY read straight from the socket, against the real server: the rows equal those of an ordinary
// query (PostgreSQL prints float8 exactly by default since version 12, so the text results are exact too), a server
// error in the middle of the rows rejects, a row of another layout rejects, and in every case the connection goes
// on answering queries afterwards.
let t: TestApp;
let client: pg.ClientBase;
let release: () => Promise<void>;

beforeAll(async () => {
  t = await createTestApp();
  const qr = t.ds.createQueryRunner();
  client = (await qr.connect()) as pg.ClientBase;
  release = () => qr.release();
});
afterAll(async () => {
  await release();
  await t.close();
});

const SELECT_ROWS = (n: number) => `SELECT 61000 + g / 86400.0::float8 AS mjd, (g - 50000) * 1.25e-18::float8 AS y, g % 7 <> 0 AS valid FROM generate_series(1, ${n}) g`;

describe('binary COPY from the socket', () => {
  it('gives the rows of a plain query bit-exactly, invalid flags included', async () => {
    const n = 120_000; // many socket chunks
    const copy = client.query(new BinarySamplesCopy(`COPY (${SELECT_ROWS(n)}) TO STDOUT (FORMAT binary)`, 1000));
    const got = await copy.columns;
    const plain = (await client.query(SELECT_ROWS(n))).rows as { mjd: number; y: number; valid: boolean }[];
    expect(got.epochMjd.length).toBe(n);
    let mismatches = 0;
    for (let i = 0; i < n; i++) {
      if (got.epochMjd[i] !== plain[i].mjd || got.y[i] !== plain[i].y || got.valid[i] !== (plain[i].valid ? 1 : 0)) mismatches++;
    }
    expect(mismatches).toBe(0);
    expect(got.valid.reduce((s, v) => s + (v ? 0 : 1), 0)).toBe(Math.floor(n / 7));
  });

  it('rejects with the server error when the query fails after sending rows, and the connection stays usable', async () => {
    // the division fails at the last of 50 000 rows, long after the first rows went out
    const copy = client.query(new BinarySamplesCopy(
      'COPY (SELECT g::float8, (1 / (50000 - g))::float8, true FROM generate_series(1, 50000) g) TO STDOUT (FORMAT binary)', 10));
    await expect(copy.columns).rejects.toThrow(/division by zero/);
    expect((await client.query('SELECT 41 + 1 AS x')).rows[0].x).toBe(42);
  });

  it('rejects a row of another layout and reads the rest of the stream, so the connection stays usable', async () => {
    const copy = client.query(new BinarySamplesCopy('COPY (SELECT g::float8, g::float8, true, g FROM generate_series(1, 20000) g) TO STDOUT (FORMAT binary)', 10));
    await expect(copy.columns).rejects.toThrow(/row layout/);
    expect((await client.query('SELECT count(*)::int AS n FROM generate_series(1, 3)')).rows[0].n).toBe(3);
  });

  it('works inside a transaction, one copy after another on the same connection', async () => {
    await client.query('BEGIN');
    const a = await client.query(new BinarySamplesCopy(`COPY (${SELECT_ROWS(1000)}) TO STDOUT (FORMAT binary)`, 1000)).columns;
    const b = await client.query(new BinarySamplesCopy(`COPY (${SELECT_ROWS(0)}) TO STDOUT (FORMAT binary)`, 0)).columns;
    await client.query('COMMIT');
    expect(a.y.length).toBe(1000);
    expect(b.y.length).toBe(0);
  });
});
