import type { MigrationInterface, QueryRunner } from 'typeorm';

// Audit chain, version 2: the hash covers every column (institute_id and prev_hash too) in an unambiguous,
// length-prefixed canonical form; ids follow the order in which events take the chain lock, so walking by id walks
// the chain; an append-only checkpoint table anchors the head every 100 events (and whenever asked), so removing
// the newest events is found. Events stored before this migration keep hash_version 1 and keep verifying under the
// version-1 form (they are not re-hashed: certificates already anchor their hashes). docs/operations.md, "Audit trail".
export class AuditChainV21765300000000 implements MigrationInterface {
  name = 'AuditChainV21765300000000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      ALTER TABLE audit_event ADD COLUMN hash_version smallint NOT NULL DEFAULT 1;
      ALTER TABLE audit_event ALTER COLUMN hash_version SET DEFAULT 2;

      -- One field of the canonical form: '-' for NULL, else <byte length>:<text>.
      CREATE FUNCTION audit_field(v text) RETURNS text LANGUAGE sql IMMUTABLE
        AS $$ SELECT CASE WHEN v IS NULL THEN '-' ELSE octet_length(v)::text || ':' || v END $$;

      CREATE FUNCTION audit_event_hash_v2(e audit_event) RETURNS text LANGUAGE sql STABLE SET search_path = public, pg_temp AS $$
        SELECT encode(sha256(convert_to('chronolevel-audit-v2' || chr(10) ||
          audit_field(e.prev_hash) || audit_field(e.id::text) ||
          audit_field(to_char(e.at AT TIME ZONE 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.US"Z"')) ||
          audit_field(e.actor_user_id::text) || audit_field(e.actor_label) || audit_field(e.action) ||
          audit_field(e.entity_type) || audit_field(e.entity_id) || audit_field(e.institute_id::text) ||
          audit_field(e.details::text), 'UTF8')), 'hex')
      $$;

      CREATE OR REPLACE FUNCTION audit_event_chain() RETURNS trigger LANGUAGE plpgsql SET search_path = public, pg_temp AS $$
      DECLARE last_hash text;
      BEGIN
        PERFORM pg_advisory_xact_lock(7261001);
        -- the id is drawn under the lock: a concurrent insert that drew its id earlier cannot end up before us
        NEW.id := nextval(pg_get_serial_sequence('audit_event', 'id'));
        SELECT hash INTO last_hash FROM audit_event ORDER BY id DESC LIMIT 1;
        NEW.prev_hash := last_hash;
        NEW.hash_version := 2;
        NEW.hash := audit_event_hash_v2(NEW);
        RETURN NEW;
      END $$;
      ALTER FUNCTION audit_event_immutable() SET search_path = public, pg_temp;

      CREATE TABLE audit_checkpoint (
        id bigserial PRIMARY KEY,
        at timestamptz NOT NULL DEFAULT now(),
        head_event_id bigint NOT NULL,
        head_hash text NOT NULL,
        event_count bigint NOT NULL CHECK (event_count > 0),
        reason text NOT NULL
      );

      CREATE FUNCTION audit_checkpoint_immutable() RETURNS trigger LANGUAGE plpgsql SET search_path = public, pg_temp AS $$
      BEGIN
        RAISE EXCEPTION 'audit_checkpoint is append-only: % refused', TG_OP USING ERRCODE = 'insufficient_privilege';
      END $$;
      CREATE TRIGGER audit_checkpoint_no_update BEFORE UPDATE OR DELETE ON audit_checkpoint FOR EACH ROW EXECUTE FUNCTION audit_checkpoint_immutable();
      CREATE TRIGGER audit_checkpoint_no_truncate BEFORE TRUNCATE ON audit_checkpoint FOR EACH STATEMENT EXECUTE FUNCTION audit_checkpoint_immutable();

      -- Writes a checkpoint of the current head (head id, head hash, number of events up to it); NULL when nothing
      -- was added since the last one. The count builds on the previous checkpoint; the verifier recounts them all.
      CREATE FUNCTION audit_write_checkpoint(p_reason text) RETURNS bigint LANGUAGE plpgsql SET search_path = public, pg_temp AS $$
      DECLARE head record; cp record; n bigint; new_id bigint;
      BEGIN
        PERFORM pg_advisory_xact_lock(7261001);
        SELECT id, hash INTO head FROM audit_event ORDER BY id DESC LIMIT 1;
        IF head.id IS NULL THEN RETURN NULL; END IF;
        SELECT head_event_id, event_count INTO cp FROM audit_checkpoint ORDER BY id DESC LIMIT 1;
        IF cp.head_event_id IS NOT NULL AND cp.head_event_id >= head.id THEN RETURN NULL; END IF;
        SELECT count(*) INTO n FROM audit_event WHERE id > coalesce(cp.head_event_id, 0) AND id <= head.id;
        INSERT INTO audit_checkpoint (head_event_id, head_hash, event_count, reason)
          VALUES (head.id, head.hash, coalesce(cp.event_count, 0) + n, p_reason) RETURNING id INTO new_id;
        RETURN new_id;
      END $$;

      CREATE FUNCTION audit_checkpoint_every_n() RETURNS trigger LANGUAGE plpgsql SET search_path = public, pg_temp AS $$
      DECLARE last_head bigint;
      BEGIN
        SELECT head_event_id INTO last_head FROM audit_checkpoint ORDER BY id DESC LIMIT 1;
        IF (SELECT count(*) FROM (SELECT 1 FROM audit_event WHERE id > coalesce(last_head, 0) LIMIT 100) s) >= 100 THEN
          PERFORM audit_write_checkpoint('every 100 events');
        END IF;
        RETURN NULL;
      END $$;
      CREATE TRIGGER audit_event_checkpoint AFTER INSERT ON audit_event FOR EACH ROW EXECUTE FUNCTION audit_checkpoint_every_n();
    `);
  }

  async down(): Promise<void> {
    throw new Error('The audit chain migration is not reversible (checkpoints are append-only).');
  }
}
