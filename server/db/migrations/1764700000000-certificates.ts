import type { MigrationInterface, QueryRunner } from 'typeorm';

// The certificate registry: every issued revision with its signed PDF, its SHA-256 and the snapshot it was
// rendered from. Rows are never deleted, and what was signed never changes; only the state moves on.
export class Certificates1764700000000 implements MigrationInterface {
  name = 'Certificates1764700000000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      -- One row per year; UPDATE … RETURNING takes the row lock that hands out serials one at a time.
      CREATE TABLE certificate_serial (
        year int PRIMARY KEY CHECK (year BETWEEN 1000 AND 9999),
        last_serial int NOT NULL CHECK (last_serial BETWEEN 0 AND 99999)
      );

      CREATE TABLE certificate (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        number text NOT NULL UNIQUE CHECK (number ~ '^CL-[0-9]{4}-[0-9]{5}-r[0-9]+$'),
        year int NOT NULL,
        serial int NOT NULL,
        revision int NOT NULL CHECK (revision >= 1),
        campaign_id uuid NOT NULL,
        result_id text,
        result_fingerprint text NOT NULL,
        institute_a_id uuid REFERENCES institute(id),
        institute_b_id uuid REFERENCES institute(id),
        campaign_label text NOT NULL,
        state text NOT NULL DEFAULT 'valid' CHECK (state IN ('valid','superseded','revoked')),
        superseded_by uuid REFERENCES certificate(id) DEFERRABLE INITIALLY DEFERRED,
        superseded_at timestamptz,
        revoked_at timestamptz,
        revoked_by uuid REFERENCES app_user(id),
        revocation_reason text,
        issued_by uuid REFERENCES app_user(id),
        issued_by_label text NOT NULL,
        issued_at timestamptz NOT NULL DEFAULT now(),
        pdf bytea NOT NULL,
        pdf_sha256 text NOT NULL UNIQUE CHECK (pdf_sha256 ~ '^[0-9a-f]{64}$'),
        pdf_bytes int NOT NULL,
        snapshot jsonb NOT NULL,
        UNIQUE (year, serial, revision),
        CHECK ((state = 'superseded') = (superseded_by IS NOT NULL)),
        CHECK ((state = 'revoked') = (revoked_at IS NOT NULL AND revocation_reason IS NOT NULL))
      );
      -- At most one valid certificate per campaign: concurrent issues cannot both win.
      CREATE UNIQUE INDEX certificate_one_valid_per_campaign ON certificate(campaign_id) WHERE state = 'valid';
      CREATE INDEX certificate_campaign ON certificate(campaign_id);
      CREATE INDEX certificate_issued_at ON certificate(issued_at);
      CREATE INDEX certificate_institute_a ON certificate(institute_a_id);
      CREATE INDEX certificate_institute_b ON certificate(institute_b_id);

      -- Nothing is ever deleted, and what was signed stays as signed.
      CREATE FUNCTION certificate_guard() RETURNS trigger LANGUAGE plpgsql AS $$
      BEGIN
        IF TG_OP IN ('DELETE', 'TRUNCATE') THEN
          RAISE EXCEPTION 'certificates are never deleted' USING ERRCODE = 'insufficient_privilege';
        END IF;
        IF NEW.number IS DISTINCT FROM OLD.number OR NEW.pdf IS DISTINCT FROM OLD.pdf OR NEW.pdf_sha256 IS DISTINCT FROM OLD.pdf_sha256
           OR NEW.snapshot IS DISTINCT FROM OLD.snapshot OR NEW.campaign_id IS DISTINCT FROM OLD.campaign_id
           OR NEW.issued_at IS DISTINCT FROM OLD.issued_at OR NEW.revision IS DISTINCT FROM OLD.revision THEN
          RAISE EXCEPTION 'an issued certificate cannot be changed, only superseded or revoked' USING ERRCODE = 'insufficient_privilege';
        END IF;
        IF OLD.state <> 'valid' AND NEW.state IS DISTINCT FROM OLD.state THEN
          RAISE EXCEPTION 'a % certificate stays %', OLD.state, OLD.state USING ERRCODE = 'insufficient_privilege';
        END IF;
        RETURN NEW;
      END $$;
      CREATE TRIGGER certificate_guard BEFORE UPDATE OR DELETE ON certificate FOR EACH ROW EXECUTE FUNCTION certificate_guard();
      CREATE TRIGGER certificate_no_truncate BEFORE TRUNCATE ON certificate FOR EACH STATEMENT EXECUTE FUNCTION certificate_guard();
    `);
  }

  async down(): Promise<void> {
    throw new Error('The certificate registry is not reversible: issued certificates are never deleted.');
  }
}
