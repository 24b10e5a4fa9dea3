import type { MigrationInterface, QueryRunner } from 'typeorm';

export class Foundation1764650000000 implements MigrationInterface {
  name = 'Foundation1764650000000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      CREATE TABLE institute (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        code text NOT NULL UNIQUE,
        name text NOT NULL,
        city text,
        kind text NOT NULL CHECK (kind IN ('laboratory','coordinating','audit','other')),
        created_at timestamptz NOT NULL DEFAULT now()
      );
      CREATE TABLE app_user (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        email text NOT NULL UNIQUE CHECK (email = lower(email)),
        display_name text NOT NULL,
        role text NOT NULL CHECK (role IN ('operator','coordinator','auditor','admin')),
        institute_id uuid REFERENCES institute(id),
        created_at timestamptz NOT NULL DEFAULT now(),
        last_sign_in_at timestamptz
      );
      CREATE TABLE api_token (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        user_id uuid NOT NULL REFERENCES app_user(id),
        name text NOT NULL,
        prefix text NOT NULL,
        token_hash text NOT NULL UNIQUE,
        created_at timestamptz NOT NULL DEFAULT now(),
        last_used_at timestamptz,
        revoked_at timestamptz
      );
      CREATE INDEX api_token_user ON api_token(user_id);

      -- express-session store (connect-pg-simple's layout)
      CREATE TABLE "session" (
        sid varchar NOT NULL PRIMARY KEY,
        sess json NOT NULL,
        expire timestamp(6) NOT NULL
      );
      CREATE INDEX session_expire ON "session"(expire);

      -- SAML: outstanding AuthnRequest ids and assertion ids already consumed (replay protection survives restarts)
      CREATE TABLE saml_request (
        id text PRIMARY KEY,
        value text NOT NULL,
        created_at timestamptz NOT NULL DEFAULT now()
      );
      CREATE TABLE saml_assertion_seen (
        id text PRIMARY KEY,
        seen_at timestamptz NOT NULL DEFAULT now()
      );

      CREATE TABLE mail_outbox (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        to_address text NOT NULL,
        subject text NOT NULL,
        text_body text NOT NULL,
        created_at timestamptz NOT NULL DEFAULT now(),
        sent_at timestamptz,
        attempts int NOT NULL DEFAULT 0,
        last_error text
      );
      CREATE INDEX mail_outbox_pending ON mail_outbox(created_at) WHERE sent_at IS NULL;

      CREATE TABLE audit_event (
        id bigserial PRIMARY KEY,
        at timestamptz NOT NULL DEFAULT now(),
        actor_user_id uuid,
        actor_label text NOT NULL,
        action text NOT NULL,
        entity_type text NOT NULL,
        entity_id text,
        institute_id uuid,
        details jsonb NOT NULL DEFAULT '{}'::jsonb,
        prev_hash text,
        hash text NOT NULL DEFAULT ''
      );
      CREATE INDEX audit_event_entity ON audit_event(entity_type, entity_id);

      -- Hash chain: each event's hash covers the previous hash and the event's content.
      CREATE FUNCTION audit_event_chain() RETURNS trigger LANGUAGE plpgsql AS $$
      DECLARE last_hash text;
      BEGIN
        PERFORM pg_advisory_xact_lock(7261001);
        SELECT hash INTO last_hash FROM audit_event ORDER BY id DESC LIMIT 1;
        NEW.prev_hash := last_hash;
        NEW.hash := encode(sha256(convert_to(
          coalesce(last_hash, '') || '|' || NEW.id::text || '|' || to_char(NEW.at AT TIME ZONE 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.US') || '|' ||
          coalesce(NEW.actor_user_id::text, '') || '|' || NEW.actor_label || '|' || NEW.action || '|' || NEW.entity_type || '|' ||
          coalesce(NEW.entity_id, '') || '|' || NEW.details::text, 'UTF8')), 'hex');
        RETURN NEW;
      END $$;
      CREATE TRIGGER audit_event_chain BEFORE INSERT ON audit_event FOR EACH ROW EXECUTE FUNCTION audit_event_chain();

      -- Append-only: the database itself refuses changes to history.
      CREATE FUNCTION audit_event_immutable() RETURNS trigger LANGUAGE plpgsql AS $$
      BEGIN
        RAISE EXCEPTION 'audit_event is append-only: % refused', TG_OP USING ERRCODE = 'insufficient_privilege';
      END $$;
      CREATE TRIGGER audit_event_no_update BEFORE UPDATE OR DELETE ON audit_event FOR EACH ROW EXECUTE FUNCTION audit_event_immutable();
      CREATE TRIGGER audit_event_no_truncate BEFORE TRUNCATE ON audit_event FOR EACH STATEMENT EXECUTE FUNCTION audit_event_immutable();
    `);
  }

  async down(): Promise<void> {
    throw new Error('The foundation migration is not reversible (the audit trail is append-only).');
  }
}
