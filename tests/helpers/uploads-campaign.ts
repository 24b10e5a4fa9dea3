import type { DataSource } from 'typeorm';

// A minimal campaign for upload tests, written straight into the registry tables (two sites, two clocks with a
// budget version each, a link, the campaign). All values are invented.
export async function insertUploadCampaign(
  ds: DataSource,
  opts: { instituteCode?: string; otherInstituteCode?: string; state?: string; referenceRatio?: string; periodStart?: string; periodEnd?: string } = {},
): Promise<string> {
  const tag = Math.random().toString(36).slice(2, 8);
  const inst = async (code: string) => ((await ds.query('SELECT id FROM institute WHERE code = $1', [code])) as { id: string }[])[0].id;
  const a = await inst(opts.instituteCode ?? 'SCL');
  const b = await inst(opts.otherInstituteCode ?? 'HMO');
  const site = async (institute: string, name: string, lat: number) =>
    ((await ds.query(
      `INSERT INTO site (institute_id, name, reference_point, crs, coordinates, latitude_deg, longitude_deg, ellipsoidal_height_m, x_m, y_m, z_m,
         quasigeoid_source, quasigeoid_height_m, quasigeoid_u_m)
       VALUES ($1, $2, 'test pillar', 'EPSG:4979', '{}'::jsonb, $3, 10, 50, 0, 0, 0, 'entered', 40, 0.02) RETURNING id`,
      [institute, name, lat],
    )) as { id: string }[])[0].id;
  const siteA = await site(a, `upload-test-a-${tag}`, 45);
  const siteB = await site(b, `upload-test-b-${tag}`, 46);
  const clock = async (institute: string, siteId: string, name: string) => {
    const id = ((await ds.query(
      `INSERT INTO clock (site_id, institute_id, name, kind, species, nominal_frequency_hz) VALUES ($1, $2, $3, 'optical_lattice', 'Sr87', '429228004229873.7') RETURNING id`,
      [siteId, institute, name],
    )) as { id: string }[])[0].id;
    const v = ((await ds.query(
      `INSERT INTO clock_budget_version (clock_id, version, rows, total_correction, total_uncertainty, created_by) VALUES ($1, 1, '[]'::jsonb, 0, 1e-17, 'test') RETURNING id`,
      [id],
    )) as { id: string }[])[0].id;
    return { id, v };
  };
  const ca = await clock(a, siteA, `upload-test-clock-a-${tag}`);
  const cb = await clock(b, siteB, `upload-test-clock-b-${tag}`);
  const link = ((await ds.query(
    `INSERT INTO fibre_link (name, site_a_id, site_b_id, fibre_length_km, fractional_uncertainty) VALUES ($1, $2, $3, 350, 1e-19) RETURNING id`,
    [`upload-test-link-${tag}`, siteA, siteB],
  )) as { id: string }[])[0].id;
  const campaign = ((await ds.query(
    `INSERT INTO campaign (name, institute_id, clock_a_id, clock_b_id, link_id, period_start, period_end, reference_ratio, reference_ratio_u_rel,
       reference_ratio_source, budget_version_a_id, budget_version_b_id, state, created_by)
     VALUES ($1, $2, $3, $4, $5, $6, $7, $8, 0, 'same species', $9, $10, $11, 'test') RETURNING id`,
    [`upload test ${tag}`, a, ca.id, cb.id, link, opts.periodStart ?? '2026-01-01T00:00:00Z', opts.periodEnd ?? '2026-12-31T00:00:00Z',
      opts.referenceRatio ?? '1', ca.v, cb.v, opts.state ?? 'draft'],
  )) as { id: string }[])[0].id;
  return campaign;
}
