import crypto from 'node:crypto';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { SAMPLE_PARTITIONS } from '../../server/db/migrations/1765800001000-sample-partitions';
import { createTestApp, type TestApp } from '../helpers/test-app';

// Samples are stored in a table partitioned by series (hash of series_id): the demo's uploads land in the
// partitions, each series wholly in one, and a query for one series is pruned to one partition.
let t: TestApp;
beforeAll(async () => {
  t = await createTestApp();
});
afterAll(() => t.close());

describe('sample storage partitioned by series', () => {
  it('ratio_sample is hash-partitioned on series_id with every partition attached', async () => {
    const [p] = await t.ds.query(`SELECT pt.partstrat, a.attname FROM pg_partitioned_table pt JOIN pg_class c ON c.oid = pt.partrelid
      JOIN pg_attribute a ON a.attrelid = c.oid AND a.attnum = pt.partattrs[0] WHERE c.relname = 'ratio_sample'`);
    expect(p).toEqual({ partstrat: 'h', attname: 'series_id' });
    const parts = await t.ds.query(`SELECT count(*)::int AS n FROM pg_inherits i JOIN pg_class c ON c.oid = i.inhparent WHERE c.relname = 'ratio_sample'`);
    expect(parts[0].n).toBe(SAMPLE_PARTITIONS);
  });

  it('every seeded series lies in exactly one partition, and a one-series query scans one partition', async () => {
    const rows: { series_id: string; partitions: number; samples: number }[] = await t.ds.query(
      `SELECT series_id, count(DISTINCT tableoid)::int AS partitions, count(*)::int AS samples FROM ratio_sample GROUP BY series_id`);
    expect(rows.length).toBeGreaterThan(0);
    expect(rows.every((r) => r.partitions === 1 && r.samples > 0)).toBe(true);
    const plan: { 'QUERY PLAN': string }[] = await t.ds.query(`EXPLAIN SELECT count(*) FROM ratio_sample WHERE series_id = $1`, [rows[0].series_id]);
    const scanned = plan.map((l) => l['QUERY PLAN']).join('\n').match(/ratio_sample_p\d\d/g) ?? [];
    expect(new Set(scanned).size).toBe(1);
  });

  it('keeps each raw file whole, in parts compressed with LZ4 when the server has it', async () => {
    const [{ lz4 }] = await t.ds.query("SELECT 'lz4' = ANY (enumvals) AS lz4 FROM pg_settings WHERE name = 'default_toast_compression'");
    const series: { id: string; sha256: string; byte_size: string }[] = await t.ds.query('SELECT id, sha256, byte_size FROM ratio_series ORDER BY byte_size DESC LIMIT 3');
    expect(series.length).toBeGreaterThan(0);
    for (const s of series) {
      const parts: { bytes: Buffer; how: string | null }[] = await t.ds.query(
        'SELECT bytes, pg_column_compression(bytes) AS how FROM ratio_series_file WHERE series_id = $1 ORDER BY part', [s.id]);
      const whole = Buffer.concat(parts.map((p) => p.bytes));
      expect(whole.length).toBe(Number(s.byte_size));
      expect(crypto.createHash('sha256').update(whole).digest('hex')).toBe(s.sha256);
      // a value too short to be moved out of line (under ≈ 2 kB, PostgreSQL docs §73.2 TOAST) is stored as it is
      for (const p of parts) if (p.bytes.length > 4096) expect(p.how).toBe(lz4 ? 'lz4' : null);
    }
  });
});
