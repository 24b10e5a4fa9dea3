import type { MigrationInterface, QueryRunner } from 'typeorm';

// Every HTTP process keeps recently resolved API tokens in memory (server/tokens/token-cache.ts). A change of what a
// token lookup returns, made by any connection (another process, a script, psql), is announced on the channel
// `chronolevel_token_change` at commit: 't:<token id>' for a token, 'u:<user id>' for a person, '*' after TRUNCATE.
// Only the columns the lookup reads count; the last-used stamp a lookup writes once a minute announces nothing.
export class TokenChangeNotify1766150000000 implements MigrationInterface {
  name = 'TokenChangeNotify1766150000000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      -- one function for both tables: the trigger's argument is the payload's prefix ('t:' token, 'u:' person)
      CREATE FUNCTION token_lookup_changed() RETURNS trigger LANGUAGE plpgsql SET search_path = public, pg_temp AS $$
      BEGIN
        IF TG_OP = 'TRUNCATE' THEN
          PERFORM pg_notify('chronolevel_token_change', '*');
        ELSE
          PERFORM pg_notify('chronolevel_token_change', TG_ARGV[0] || OLD.id::text);
        END IF;
        RETURN NULL;
      END $$;
      CREATE TRIGGER api_token_changed AFTER UPDATE ON api_token FOR EACH ROW
        WHEN (OLD.revoked_at IS DISTINCT FROM NEW.revoked_at OR OLD.expires_at IS DISTINCT FROM NEW.expires_at
          OR OLD.token_hash IS DISTINCT FROM NEW.token_hash OR OLD.user_id IS DISTINCT FROM NEW.user_id OR OLD.id IS DISTINCT FROM NEW.id)
        EXECUTE FUNCTION token_lookup_changed('t:');
      CREATE TRIGGER api_token_deleted AFTER DELETE ON api_token FOR EACH ROW EXECUTE FUNCTION token_lookup_changed('t:');
      CREATE TRIGGER api_token_truncated AFTER TRUNCATE ON api_token FOR EACH STATEMENT EXECUTE FUNCTION token_lookup_changed('t:');

      CREATE TRIGGER app_user_changed AFTER UPDATE ON app_user FOR EACH ROW
        WHEN (OLD.role IS DISTINCT FROM NEW.role OR OLD.institute_id IS DISTINCT FROM NEW.institute_id
          OR OLD.deactivated_at IS DISTINCT FROM NEW.deactivated_at OR OLD.email IS DISTINCT FROM NEW.email
          OR OLD.display_name IS DISTINCT FROM NEW.display_name OR OLD.id IS DISTINCT FROM NEW.id)
        EXECUTE FUNCTION token_lookup_changed('u:');
      CREATE TRIGGER app_user_deleted AFTER DELETE ON app_user FOR EACH ROW EXECUTE FUNCTION token_lookup_changed('u:');
      CREATE TRIGGER app_user_truncated AFTER TRUNCATE ON app_user FOR EACH STATEMENT EXECUTE FUNCTION token_lookup_changed('u:');
    `);
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query(`
      DROP TRIGGER app_user_truncated ON app_user;
      DROP TRIGGER app_user_deleted ON app_user;
      DROP TRIGGER app_user_changed ON app_user;
      DROP TRIGGER api_token_truncated ON api_token;
      DROP TRIGGER api_token_deleted ON api_token;
      DROP TRIGGER api_token_changed ON api_token;
      DROP FUNCTION token_lookup_changed();
    `);
  }
}
