import type { MigrationInterface, QueryRunner } from 'typeorm';

// The institute CA's published state: signing keys withdrawn after a compromise, every CRL issued (RFC 5280 5:
// numbers only grow), and on each certificate the serial of the key that signed it and, when that key was
// withdrawn, since when the certificate is affected.
export class SigningChain1765600000000 implements MigrationInterface {
  name = 'SigningChain1765600000000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      CREATE TABLE signing_key_revocation (
        serial_hex text PRIMARY KEY CHECK (serial_hex ~ '^[0-9a-f]{2,64}$'),
        certificate_pem text NOT NULL,
        revoked_at timestamptz NOT NULL,
        compromised_since timestamptz,
        reason text NOT NULL CHECK (length(reason) BETWEEN 3 AND 500),
        revoked_by uuid REFERENCES app_user(id)
      );

      CREATE TABLE institute_crl (
        crl_number bigint PRIMARY KEY CHECK (crl_number > 0),
        this_update timestamptz NOT NULL,
        next_update timestamptz NOT NULL,
        der bytea NOT NULL
      );

      ALTER TABLE certificate
        ADD COLUMN signing_key_serial text,
        ADD COLUMN signing_key_revoked_at timestamptz;
      CREATE INDEX certificate_signing_key_serial_idx ON certificate (signing_key_serial);

      -- The key that signed a certificate is recorded once, and a withdrawal mark is never lifted.
      CREATE FUNCTION certificate_signing_key_guard() RETURNS trigger LANGUAGE plpgsql AS $$
      BEGIN
        IF OLD.signing_key_serial IS NOT NULL AND NEW.signing_key_serial IS DISTINCT FROM OLD.signing_key_serial THEN
          RAISE EXCEPTION 'the signing key of an issued certificate cannot be changed' USING ERRCODE = 'insufficient_privilege';
        END IF;
        IF OLD.signing_key_revoked_at IS NOT NULL AND NEW.signing_key_revoked_at IS DISTINCT FROM OLD.signing_key_revoked_at THEN
          RAISE EXCEPTION 'a withdrawn signing key stays withdrawn' USING ERRCODE = 'insufficient_privilege';
        END IF;
        RETURN NEW;
      END $$;
      CREATE TRIGGER certificate_signing_key_guard BEFORE UPDATE ON certificate FOR EACH ROW EXECUTE FUNCTION certificate_signing_key_guard();
    `);
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query(`
      DROP TRIGGER certificate_signing_key_guard ON certificate;
      DROP FUNCTION certificate_signing_key_guard();
      DROP INDEX certificate_signing_key_serial_idx;
      ALTER TABLE certificate DROP COLUMN signing_key_revoked_at, DROP COLUMN signing_key_serial;
      DROP TABLE institute_crl;
      DROP TABLE signing_key_revocation;
    `);
  }
}
