import type { MigrationInterface, QueryRunner } from 'typeorm';

// Registry (sites, quasigeoid grids, clocks, budget versions, reference frequencies, fibre links) and campaigns.
// The reference-frequency rows are reference data for every installation, not demo data.

const CIPM2009 = 'CIPM 2009, Recommendation 2 (98th meeting), list of recommended values of standard frequencies';
const CIPM2021 =
  'CIPM 2021 update (Margolis et al. 2024, Metrologia 61:035005) — from memory — confirm against the BIPM list before use';

const referenceRows: [string, string, number, string, boolean][] = [
  ['Cs133', '9192631770', 0, 'SI definition of the second (exact)', true],
  ['Sr87', '429228004229873.7', 1e-15, CIPM2009, true],
  ['Sr88', '429228066418012', 1e-14, CIPM2009, true],
  ['Ca40+', '411042129776393', 4e-14, CIPM2009, true],
  ['Yb171+E3', '642121496772657', 6e-14, CIPM2009, true],
  ['Yb171', '518295836590864', 1.6e-13, CIPM2009, true],
  ['Sr87', '429228004229872.99', 1.9e-16, CIPM2021, false],
  ['Yb171', '518295836590863.63', 1.9e-16, CIPM2021, false],
  ['Yb171+E3', '642121496772645.12', 1.9e-16, CIPM2021, false],
  ['Yb171+E2', '688358979309308.24', 1.9e-16, CIPM2021, false],
  ['Al27+', '1121015393207859.16', 1.9e-16, `${CIPM2021}; the uncertainty for this ion is larger than shown`, false],
  ['Hg199', '1128575290808154.32', 1.9e-16, CIPM2021, false],
];

export class Registry1764660000000 implements MigrationInterface {
  name = 'Registry1764660000000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      CREATE TABLE quasigeoid_grid (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        name text NOT NULL,
        file_name text,
        sha256 text NOT NULL UNIQUE,
        latitude_min_deg float8 NOT NULL,
        longitude_min_deg float8 NOT NULL,
        latitude_step_deg float8 NOT NULL CHECK (latitude_step_deg > 0),
        longitude_step_deg float8 NOT NULL CHECK (longitude_step_deg > 0),
        latitude_count int NOT NULL CHECK (latitude_count >= 2),
        longitude_count int NOT NULL CHECK (longitude_count >= 2),
        heights_m float8[] NOT NULL,
        uncertainty_m float8 NOT NULL CHECK (uncertainty_m >= 0),
        uploaded_by text NOT NULL,
        created_at timestamptz NOT NULL DEFAULT now(),
        CHECK (cardinality(heights_m) = latitude_count * longitude_count)
      );

      CREATE TABLE site (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        institute_id uuid NOT NULL REFERENCES institute(id),
        name text NOT NULL,
        reference_point text NOT NULL,
        crs text NOT NULL,
        coordinates jsonb NOT NULL,
        latitude_deg float8 NOT NULL CHECK (latitude_deg BETWEEN -90 AND 90),
        longitude_deg float8 NOT NULL CHECK (longitude_deg BETWEEN -180 AND 180),
        ellipsoidal_height_m float8 NOT NULL,
        ellipsoidal_height_u_m float8 NOT NULL DEFAULT 0 CHECK (ellipsoidal_height_u_m >= 0),
        x_m float8 NOT NULL,
        y_m float8 NOT NULL,
        z_m float8 NOT NULL,
        assumptions jsonb NOT NULL DEFAULT '[]'::jsonb,
        quasigeoid_source text NOT NULL CHECK (quasigeoid_source IN ('entered','grid')),
        quasigeoid_grid_id uuid REFERENCES quasigeoid_grid(id),
        quasigeoid_height_m float8 NOT NULL,
        quasigeoid_u_m float8 NOT NULL CHECK (quasigeoid_u_m >= 0),
        benchmark_code text,
        tie_height_difference_m float8,
        tie_u_m float8 CHECK (tie_u_m >= 0),
        created_at timestamptz NOT NULL DEFAULT now(),
        updated_at timestamptz NOT NULL DEFAULT now(),
        UNIQUE (institute_id, name),
        CHECK ((quasigeoid_source = 'grid') = (quasigeoid_grid_id IS NOT NULL)),
        CHECK ((benchmark_code IS NULL) = (tie_height_difference_m IS NULL) AND (benchmark_code IS NULL) = (tie_u_m IS NULL))
      );
      CREATE INDEX site_institute ON site(institute_id);

      CREATE TABLE clock (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        site_id uuid NOT NULL REFERENCES site(id),
        institute_id uuid NOT NULL REFERENCES institute(id),
        name text NOT NULL UNIQUE,
        kind text NOT NULL CHECK (kind IN ('optical_lattice','single_ion','microwave_fountain','hydrogen_maser')),
        species text NOT NULL,
        nominal_frequency_hz text NOT NULL,
        notes text NOT NULL DEFAULT '',
        current_budget_version int NOT NULL DEFAULT 1,
        created_at timestamptz NOT NULL DEFAULT now(),
        updated_at timestamptz NOT NULL DEFAULT now()
      );
      CREATE INDEX clock_site ON clock(site_id);

      CREATE TABLE clock_budget_version (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        clock_id uuid NOT NULL REFERENCES clock(id),
        version int NOT NULL CHECK (version >= 1),
        rows jsonb NOT NULL,
        total_correction float8 NOT NULL,
        total_uncertainty float8 NOT NULL CHECK (total_uncertainty >= 0),
        comment text,
        created_by_user_id uuid,
        created_by text NOT NULL,
        created_at timestamptz NOT NULL DEFAULT now(),
        UNIQUE (clock_id, version)
      );
      -- A budget version, once written, is evidence for the campaigns that pinned it: never changed.
      CREATE FUNCTION clock_budget_version_immutable() RETURNS trigger LANGUAGE plpgsql AS $$
      BEGIN
        RAISE EXCEPTION 'clock_budget_version is immutable: % refused', TG_OP USING ERRCODE = 'insufficient_privilege';
      END $$;
      CREATE TRIGGER clock_budget_version_no_change BEFORE UPDATE OR DELETE ON clock_budget_version
        FOR EACH ROW EXECUTE FUNCTION clock_budget_version_immutable();

      CREATE TABLE reference_frequency (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        species text NOT NULL,
        frequency_hz text NOT NULL,
        relative_uncertainty float8 NOT NULL CHECK (relative_uncertainty >= 0),
        source text NOT NULL,
        in_use boolean NOT NULL DEFAULT true,
        updated_at timestamptz NOT NULL DEFAULT now()
      );
      CREATE UNIQUE INDEX reference_frequency_one_in_use ON reference_frequency(species) WHERE in_use;

      CREATE TABLE fibre_link (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        name text NOT NULL UNIQUE,
        site_a_id uuid NOT NULL REFERENCES site(id),
        site_b_id uuid NOT NULL REFERENCES site(id),
        fibre_length_km float8 NOT NULL CHECK (fibre_length_km > 0),
        fractional_uncertainty float8 NOT NULL CHECK (fractional_uncertainty >= 0),
        notes text NOT NULL DEFAULT '',
        created_at timestamptz NOT NULL DEFAULT now(),
        updated_at timestamptz NOT NULL DEFAULT now()
      );

      CREATE TABLE campaign (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        name text NOT NULL,
        institute_id uuid NOT NULL REFERENCES institute(id),
        clock_a_id uuid NOT NULL REFERENCES clock(id),
        clock_b_id uuid NOT NULL REFERENCES clock(id),
        link_id uuid NOT NULL REFERENCES fibre_link(id),
        period_start timestamptz NOT NULL,
        period_end timestamptz NOT NULL,
        reference_ratio text NOT NULL,
        reference_ratio_u_rel float8 NOT NULL CHECK (reference_ratio_u_rel >= 0),
        reference_ratio_source text NOT NULL,
        reference_ratio_justification text,
        operator_notes text NOT NULL DEFAULT '',
        budget_version_a_id uuid NOT NULL REFERENCES clock_budget_version(id),
        budget_version_b_id uuid NOT NULL REFERENCES clock_budget_version(id),
        state text NOT NULL CHECK (state IN ('draft','submitted','in_review','accepted','returned','certified')),
        return_reason text,
        created_by_user_id uuid,
        created_by text NOT NULL,
        created_at timestamptz NOT NULL DEFAULT now(),
        updated_at timestamptz NOT NULL DEFAULT now(),
        CHECK (period_end > period_start),
        CHECK (clock_a_id <> clock_b_id)
      );
      CREATE INDEX campaign_institute ON campaign(institute_id);
      CREATE INDEX campaign_state ON campaign(state);

      CREATE TABLE campaign_event (
        id bigserial PRIMARY KEY,
        campaign_id uuid NOT NULL REFERENCES campaign(id),
        at timestamptz NOT NULL DEFAULT now(),
        from_state text,
        to_state text NOT NULL,
        actor_user_id uuid,
        actor_label text NOT NULL,
        note text
      );
      CREATE INDEX campaign_event_campaign ON campaign_event(campaign_id, id);
    `);
    for (const [species, frequencyHz, uRel, source, inUse] of referenceRows) {
      await q.query('INSERT INTO reference_frequency (species, frequency_hz, relative_uncertainty, source, in_use) VALUES ($1, $2, $3, $4, $5)', [species, frequencyHz, uRel, source, inUse]);
    }
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query(`
      DROP TABLE campaign_event; DROP TABLE campaign; DROP TABLE fibre_link; DROP TABLE reference_frequency;
      DROP TABLE clock_budget_version; DROP FUNCTION clock_budget_version_immutable(); DROP TABLE clock; DROP TABLE site; DROP TABLE quasigeoid_grid;
    `);
  }
}
