import type { MigrationInterface, QueryRunner } from 'typeorm';

// The levelling network: height datums, benchmarks, levelling sections and immutable adjustment runs.
export class Network1764690000000 implements MigrationInterface {
  name = 'Network1764690000000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      CREATE TABLE height_datum (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        name text NOT NULL UNIQUE,
        tide_system text NOT NULL CHECK (tide_system IN ('mean-tide','zero-tide','tide-free')),
        realisation_epoch text,
        loop_tolerance_mm_per_sqrt_km double precision NOT NULL DEFAULT 4 CHECK (loop_tolerance_mm_per_sqrt_km > 0),
        section_tolerance_mm_per_sqrt_km double precision NOT NULL DEFAULT 4 CHECK (section_tolerance_mm_per_sqrt_km > 0),
        notes text,
        created_at timestamptz NOT NULL DEFAULT now()
      );
      CREATE TABLE benchmark (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        code text NOT NULL UNIQUE,
        name text NOT NULL,
        datum_id uuid NOT NULL REFERENCES height_datum(id),
        crs text NOT NULL,
        coordinates_entered jsonb NOT NULL,
        latitude_deg double precision NOT NULL,
        longitude_deg double precision NOT NULL,
        ellipsoidal_height_m double precision NOT NULL,
        known_entered_as text CHECK (known_entered_as IN ('C','H')),
        known_c_m2s2 double precision,
        known_normal_height_m double precision,
        known_uncertainty_c_m2s2 double precision CHECK (known_uncertainty_c_m2s2 >= 0),
        fixed boolean NOT NULL DEFAULT false,
        monumentation text,
        state text NOT NULL DEFAULT 'in-use' CHECK (state IN ('in-use','destroyed')),
        created_at timestamptz NOT NULL DEFAULT now(),
        updated_at timestamptz NOT NULL DEFAULT now(),
        CHECK (NOT fixed OR known_c_m2s2 IS NOT NULL)
      );
      CREATE INDEX benchmark_datum ON benchmark(datum_id);
      CREATE TABLE levelling_section (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        line_name text,
        from_benchmark_id uuid NOT NULL REFERENCES benchmark(id),
        to_benchmark_id uuid NOT NULL REFERENCES benchmark(id),
        delta_height_m double precision NOT NULL,
        length_km double precision NOT NULL CHECK (length_km > 0),
        mean_gravity_ms2 double precision NOT NULL CHECK (mean_gravity_ms2 BETWEEN 9.7 AND 9.9),
        gravity_from_normal boolean NOT NULL DEFAULT false,
        observed_on date,
        forward_m double precision,
        backward_m double precision,
        upload_sha256 text,
        created_at timestamptz NOT NULL DEFAULT now(),
        CHECK (from_benchmark_id <> to_benchmark_id)
      );
      CREATE INDEX levelling_section_from ON levelling_section(from_benchmark_id);
      CREATE INDEX levelling_section_to ON levelling_section(to_benchmark_id);

      -- A run keeps its inputs, options and results for good: once finished it can be neither changed nor deleted.
      CREATE TABLE adjustment_run (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        state text NOT NULL DEFAULT 'queued' CHECK (state IN ('queued','running','done','failed')),
        progress double precision NOT NULL DEFAULT 0,
        stage text,
        options jsonb NOT NULL,
        inputs jsonb NOT NULL,
        input_summary jsonb NOT NULL,
        result jsonb,
        error jsonb,
        sigma0 double precision,
        degrees_of_freedom integer,
        global_test_passed boolean,
        suspects integer,
        created_by uuid REFERENCES app_user(id),
        created_at timestamptz NOT NULL DEFAULT now(),
        started_at timestamptz,
        finished_at timestamptz
      );
      CREATE INDEX adjustment_run_created ON adjustment_run(created_at DESC);
      CREATE FUNCTION adjustment_run_immutable() RETURNS trigger LANGUAGE plpgsql AS $$
      BEGIN
        IF TG_OP = 'DELETE' THEN
          RAISE EXCEPTION 'adjustment runs are kept for good';
        END IF;
        IF OLD.state IN ('done','failed') THEN
          RAISE EXCEPTION 'a finished adjustment run cannot be changed';
        END IF;
        IF NEW.inputs IS DISTINCT FROM OLD.inputs OR NEW.options IS DISTINCT FROM OLD.options OR NEW.created_at IS DISTINCT FROM OLD.created_at THEN
          RAISE EXCEPTION 'the inputs and options of an adjustment run cannot be changed';
        END IF;
        RETURN NEW;
      END $$;
      CREATE TRIGGER adjustment_run_immutable BEFORE UPDATE OR DELETE ON adjustment_run
        FOR EACH ROW EXECUTE FUNCTION adjustment_run_immutable();
    `);
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query(`
      DROP TABLE adjustment_run;
      DROP FUNCTION adjustment_run_immutable();
      DROP TABLE levelling_section;
      DROP TABLE benchmark;
      DROP TABLE height_datum;
    `);
  }
}
