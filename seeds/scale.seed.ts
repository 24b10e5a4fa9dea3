import type { DataSource, EntityManager } from 'typeorm';

// Scales the invented demo scenario up for load and volume measurements (`npm run admin -- scale-demo`, and the
// load benchmark): institutes, people, sites, clocks, links, campaigns, benchmarks and sections, all invented.
// Rows are cloned from the seeded demo rows in SQL (INSERT … SELECT over generate_series), column by column from
// the live table definition, so every column a later migration adds keeps the demo row's value and every
// constraint and trigger of the schema still applies. Names say they are scaled copies.

export type ScaleTargets = { institutes: number; people: number; campaigns: number; benchmarks: number; sections: number };
export const defaultScaleTargets: ScaleTargets = { institutes: 50, people: 500, campaigns: 10_000, benchmarks: 2_000, sections: 6_000 };

async function columnsOf(m: EntityManager, table: string): Promise<string[]> {
  const rows: { column_name: string }[] = await m.query(
    `SELECT column_name FROM information_schema.columns WHERE table_schema = current_schema() AND table_name = $1 AND is_generated = 'NEVER' ORDER BY ordinal_position`,
    [table],
  );
  if (!rows.length) throw new Error(`scale-demo: no table ${table}`);
  return rows.map((r) => r.column_name);
}

/**
 * INSERT INTO table (every column) SELECT (override or the template's value) FROM (template rows) t, generate_series(1, n) g.
 * `overrides` maps a column to an SQL expression over t.* and g; `id` gets a fresh uuid unless overridden.
 */
async function cloneRows(m: EntityManager, table: string, template: string, n: number, overrides: Record<string, string>, params: unknown[] = []) {
  if (n <= 0) return 0;
  const cols = await columnsOf(m, table);
  const over = new Map(Object.entries(overrides));
  if (!over.has('id') && cols.includes('id')) over.set('id', 'gen_random_uuid()');
  const select = cols.map((c) => (over.has(c) ? `${over.get(c)}` : `t."${c}"`)).join(', ');
  const sql = `INSERT INTO "${table}" (${cols.map((c) => `"${c}"`).join(', ')}) SELECT ${select} FROM (${template}) t, generate_series(1, ${Math.floor(n)}) g`;
  await m.query(sql, params);
  return n;
}

const count = async (m: EntityManager, table: string) => Number((await m.query(`SELECT count(*)::int AS n FROM "${table}"`))[0].n);

export async function scaleDemo(ds: DataSource, targets: ScaleTargets = defaultScaleTargets, log: (msg: string) => void = () => {}) {
  return ds.transaction(async (m) => {
    // A scaled copy refuses to run twice: the clone names are unique.
    if ((await m.query(`SELECT 1 FROM institute WHERE code LIKE 'S%-X'`)).length) throw new Error('the demo is already scaled up');
    const labs: { id: string; code: string }[] = await m.query(`SELECT id, code FROM institute WHERE kind = 'laboratory' ORDER BY code LIMIT 1`);
    if (!labs.length) throw new Error('scale-demo needs the demo scenario (no laboratory institute found)');

    const newInstitutes = Math.max(0, targets.institutes - (await count(m, 'institute')));
    await cloneRows(m, 'institute', `SELECT * FROM institute WHERE id = $1`, newInstitutes, {
      code: `'S' || lpad(g::text, 3, '0') || '-X'`,
      name: `'Scaled copy laboratory ' || g || ' (invented)'`,
    }, [labs[0].id]);
    log(`institutes: +${newInstitutes}`);
    const scaled: { id: string }[] = await m.query(`SELECT id FROM institute WHERE code LIKE 'S%-X' ORDER BY code`);

    // Per scaled institute: two sites, two clocks, one link, copied from the first demo laboratory's records.
    const [siteTpl] = await m.query(`SELECT id FROM site WHERE institute_id = $1 ORDER BY name LIMIT 1`, [labs[0].id]);
    const [clockTpl] = await m.query(`SELECT id FROM clock WHERE institute_id = $1 ORDER BY name LIMIT 1`, [labs[0].id]);
    const [linkTpl] = await m.query(`SELECT id FROM fibre_link ORDER BY name LIMIT 1`);
    if (!siteTpl || !clockTpl || !linkTpl) throw new Error('scale-demo needs the seeded registry (site, clock, link)');
    for (const [k, inst] of scaled.entries()) {
      await cloneRows(m, 'site', `SELECT * FROM site WHERE id = $1`, 2, { institute_id: '$2::uuid', name: `'Scaled site ' || g`, latitude_deg: `t.latitude_deg + ${(k % 10) * 0.05} + g * 0.01` }, [siteTpl.id, inst.id]);
      await cloneRows(m, 'clock', `SELECT * FROM clock WHERE id = $1`, 2, {
        institute_id: '$2::uuid',
        site_id: `(SELECT id FROM site WHERE institute_id = $2::uuid AND name = 'Scaled site ' || g)`,
        name: `'S${k + 1}-clock-' || g`,
        current_budget_version: '1',
      }, [clockTpl.id, inst.id]);
    }
    // Every scaled clock gets budget version 1, copied from the template clock's version 1.
    await m.query(
      `INSERT INTO clock_budget_version (${(await columnsOf(m, 'clock_budget_version')).map((c) => `"${c}"`).join(', ')})
       SELECT ${(await columnsOf(m, 'clock_budget_version')).map((c) => (c === 'id' ? 'gen_random_uuid()' : c === 'clock_id' ? 'c.id' : c === 'version' ? '1' : `v."${c}"`)).join(', ')}
       FROM clock c JOIN institute i ON i.id = c.institute_id AND i.code LIKE 'S%-X',
            (SELECT * FROM clock_budget_version WHERE clock_id = $1 ORDER BY version LIMIT 1) v`,
      [clockTpl.id],
    );
    const linkCols = await columnsOf(m, 'fibre_link');
    await m.query(
      `INSERT INTO fibre_link (${linkCols.map((c) => `"${c}"`).join(', ')})
       SELECT ${linkCols.map((c) => ({ id: 'gen_random_uuid()', name: `'Scaled link ' || i.code`, site_a_id: 'sa.id', site_b_id: 'sb.id' } as Record<string, string>)[c] ?? `l."${c}"`).join(', ')}
       FROM institute i
       JOIN site sa ON sa.institute_id = i.id AND sa.name = 'Scaled site 1'
       JOIN site sb ON sb.institute_id = i.id AND sb.name = 'Scaled site 2',
       (SELECT * FROM fibre_link WHERE id = $1) l
       WHERE i.code LIKE 'S%-X'`,
      [linkTpl.id],
    );
    log(`registry: ${scaled.length * 2} sites, ${scaled.length * 2} clocks, ${scaled.length} links`);

    // People: operators of the scaled institutes, plus a few coordinators and auditors.
    const newPeople = Math.max(0, targets.people - (await count(m, 'app_user')));
    const [userTpl] = await m.query(`SELECT id FROM app_user WHERE role = 'operator' ORDER BY email LIMIT 1`);
    await cloneRows(m, 'app_user', `SELECT * FROM app_user WHERE id = $1`, newPeople, {
      email: `'person' || g || '@scaled-copy.invalid'`,
      display_name: `'Scaled Person ' || g`,
      role: `CASE WHEN g % 50 = 0 THEN 'coordinator' WHEN g % 25 = 0 THEN 'auditor' ELSE 'operator' END`,
      institute_id: `CASE WHEN g % 50 = 0 OR g % 25 = 0 THEN NULL ELSE (SELECT id FROM institute WHERE code = 'S' || lpad((1 + g % ${Math.max(1, scaled.length)})::text, 3, '0') || '-X') END`,
      last_sign_in_at: 'NULL',
    }, [userTpl.id]);
    log(`people: +${newPeople}`);

    // Campaigns: copies of a demo campaign on each scaled institute's clock pair, spread over states and time.
    const [campTpl] = await m.query(`SELECT id FROM campaign ORDER BY created_at LIMIT 1`);
    if (!campTpl) throw new Error('scale-demo needs a seeded campaign');
    const newCampaigns = Math.max(0, targets.campaigns - (await count(m, 'campaign')));
    const perInstitute = Math.ceil(newCampaigns / Math.max(1, scaled.length));
    for (const [k, inst] of scaled.entries()) {
      const n = Math.min(perInstitute, newCampaigns - k * perInstitute);
      if (n <= 0) break;
      await cloneRows(m, 'campaign', `SELECT t0.*, ca.id AS new_a, cb.id AS new_b, l.id AS new_link, va.id AS new_va, vb.id AS new_vb
          FROM campaign t0
          JOIN clock ca ON ca.institute_id = $2::uuid AND ca.name LIKE '%-clock-1'
          JOIN clock cb ON cb.institute_id = $2::uuid AND cb.name LIKE '%-clock-2'
          JOIN fibre_link l ON l.site_a_id = ca.site_id
          JOIN clock_budget_version va ON va.clock_id = ca.id AND va.version = 1
          JOIN clock_budget_version vb ON vb.clock_id = cb.id AND vb.version = 1
          WHERE t0.id = $1`, n, {
        name: `'Scaled campaign ${k + 1}-' || g`,
        institute_id: '$2::uuid',
        clock_a_id: 't.new_a', clock_b_id: 't.new_b', link_id: 't.new_link',
        budget_version_a_id: 't.new_va', budget_version_b_id: 't.new_vb',
        reference_ratio: `'1'`, reference_ratio_u_rel: '0',
        state: `(ARRAY['draft','submitted','in_review','accepted','returned'])[1 + g % 5]`,
        period_start: `timestamptz '2025-01-01' + (g || ' hours')::interval`,
        period_end: `timestamptz '2025-01-03' + (g || ' hours')::interval`,
        created_at: `timestamptz '2025-01-01' + (g || ' minutes')::interval`,
        updated_at: `timestamptz '2025-06-01' + ((g * 7) % 10000 || ' minutes')::interval`,
      }, [campTpl.id, inst.id]);
    }
    log(`campaigns: +${newCampaigns}`);

    // Levelling network: a long invented line of benchmarks in the first datum, each section joining neighbours
    // (and every third a diagonal), so the network stays connected.
    const [bmTpl] = await m.query(`SELECT b.id FROM benchmark b WHERE NOT b.fixed ORDER BY code LIMIT 1`);
    const [secTpl] = await m.query(`SELECT id FROM levelling_section ORDER BY created_at LIMIT 1`);
    const newBenchmarks = Math.max(0, targets.benchmarks - (await count(m, 'benchmark')));
    if (bmTpl && newBenchmarks) {
      await cloneRows(m, 'benchmark', `SELECT * FROM benchmark WHERE id = $1`, newBenchmarks, {
        code: `'SX-' || lpad(g::text, 5, '0')`,
        name: `'Scaled benchmark ' || g`,
        latitude_deg: `t.latitude_deg + (g % 100) * 0.01`,
        longitude_deg: `t.longitude_deg + (g / 100) * 0.01`,
        fixed: 'false',
      }, [bmTpl.id]);
      const newSections = Math.max(0, targets.sections - (await count(m, 'levelling_section')));
      const sectionCols = await columnsOf(m, 'levelling_section');
      const pick = (c: string) => ({
        id: 'gen_random_uuid()',
        line_name: `'Scaled line'`,
        from_benchmark_id: `(SELECT id FROM benchmark WHERE code = 'SX-' || lpad(((g - 1) % ${newBenchmarks} + 1)::text, 5, '0'))`,
        to_benchmark_id: `(SELECT id FROM benchmark WHERE code = 'SX-' || lpad(((g - 1 + 1 + (g % 3 = 0)::int * 9) % ${newBenchmarks} + 1)::text, 5, '0'))`,
        delta_height_m: `round((sin(g) * 3)::numeric, 4)::float8`,
        length_km: `1 + (g % 7)`,
        upload_sha256: 'NULL',
      } as Record<string, string>)[c] ?? `t."${c}"`;
      if (secTpl && newSections) {
        await m.query(
          `INSERT INTO levelling_section (${sectionCols.map((c) => `"${c}"`).join(', ')})
           SELECT ${sectionCols.map(pick).join(', ')} FROM (SELECT * FROM levelling_section WHERE id = $1) t, generate_series(1, ${newSections}) g`,
          [secTpl.id],
        );
      }
      log(`network: +${newBenchmarks} benchmarks, +${newSections} sections`);
    }
    await m.query('ANALYZE');
    return {
      institutes: await count(m, 'institute'),
      people: await count(m, 'app_user'),
      campaigns: await count(m, 'campaign'),
      benchmarks: await count(m, 'benchmark'),
      sections: await count(m, 'levelling_section'),
    };
  });
}
