import type { MigrationInterface, QueryRunner } from 'typeorm';

// Certificates of two kinds: of one campaign (as before) or of a calibration chain (a remote comparison of a
// transportable clock with its side-by-side calibrations). Exactly one of campaign_id / chain_id is set, checked by
// the table; one valid certificate per chain as per campaign; what was signed (including which chain or campaign it
// is about, and its kind) never changes. Requests to issue name the chain the same way, one open request per chain.
export class ChainCertificates1766100000000 implements MigrationInterface {
  name = 'ChainCertificates1766100000000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      ALTER TABLE certificate
        ADD COLUMN kind text NOT NULL DEFAULT 'campaign' CHECK (kind IN ('campaign', 'chain')),
        ADD COLUMN chain_id uuid REFERENCES calibration_chain(id),
        ALTER COLUMN campaign_id DROP NOT NULL,
        ADD CONSTRAINT certificate_one_subject CHECK (
          (kind = 'campaign' AND campaign_id IS NOT NULL AND chain_id IS NULL) OR
          (kind = 'chain' AND chain_id IS NOT NULL AND campaign_id IS NULL));
      CREATE UNIQUE INDEX certificate_one_valid_per_chain ON certificate(chain_id) WHERE state = 'valid' AND chain_id IS NOT NULL;
      CREATE INDEX certificate_chain ON certificate(chain_id) WHERE chain_id IS NOT NULL;

      -- The guard of migration 1764700000000, now also keeping the kind and the chain of an issued certificate.
      CREATE OR REPLACE FUNCTION certificate_guard() RETURNS trigger LANGUAGE plpgsql AS $$
      BEGIN
        IF TG_OP IN ('DELETE', 'TRUNCATE') THEN
          RAISE EXCEPTION 'certificates are never deleted' USING ERRCODE = 'insufficient_privilege';
        END IF;
        IF NEW.number IS DISTINCT FROM OLD.number OR NEW.pdf IS DISTINCT FROM OLD.pdf OR NEW.pdf_sha256 IS DISTINCT FROM OLD.pdf_sha256
           OR NEW.snapshot IS DISTINCT FROM OLD.snapshot OR NEW.campaign_id IS DISTINCT FROM OLD.campaign_id
           OR NEW.chain_id IS DISTINCT FROM OLD.chain_id OR NEW.kind IS DISTINCT FROM OLD.kind
           OR NEW.issued_at IS DISTINCT FROM OLD.issued_at OR NEW.revision IS DISTINCT FROM OLD.revision THEN
          RAISE EXCEPTION 'an issued certificate cannot be changed, only superseded or revoked' USING ERRCODE = 'insufficient_privilege';
        END IF;
        IF OLD.state <> 'valid' AND NEW.state IS DISTINCT FROM OLD.state THEN
          RAISE EXCEPTION 'a % certificate stays %', OLD.state, OLD.state USING ERRCODE = 'insufficient_privilege';
        END IF;
        RETURN NEW;
      END $$;

      ALTER TABLE certificate_request
        ADD COLUMN chain_id uuid REFERENCES calibration_chain(id),
        ALTER COLUMN campaign_id DROP NOT NULL,
        ADD CONSTRAINT certificate_request_one_subject CHECK ((campaign_id IS NULL) <> (chain_id IS NULL));
      CREATE UNIQUE INDEX certificate_request_one_open_per_chain ON certificate_request (chain_id) WHERE state IN ('queued', 'running') AND chain_id IS NOT NULL;
      CREATE INDEX certificate_request_chain ON certificate_request (chain_id, requested_at DESC) WHERE chain_id IS NOT NULL;
    `);
  }

  async down(): Promise<void> {
    throw new Error('Chain certificates are not reversible: issued certificates are never deleted.');
  }
}
