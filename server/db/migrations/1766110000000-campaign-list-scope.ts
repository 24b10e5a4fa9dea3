import type { MigrationInterface, QueryRunner } from 'typeorm';

// Campaign lists by index, for every caller and every sort:
// - campaign.partner_institute_id: the institute of clock B, kept by triggers (set on insert and when clock B
//   changes; followed when a clock moves to another institute). Lab staff see the campaigns where either clock is
//   theirs; with both institutes on the campaign row that is `institute_id = $1 OR partner_institute_id = $1`, a
//   bitmap OR of two indexes with good row estimates, instead of a join to clock (or a sub-select) that PostgreSQL
//   estimated badly and answered by walking a whole sort index.
// - campaign(state, id) for the sort by state; campaign(state, updated_at, id) for a state filter with the default
//   sort and for counting one state from the index alone.
export class CampaignListScope1766110000000 implements MigrationInterface {
  name = 'CampaignListScope1766110000000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      ALTER TABLE campaign ADD COLUMN partner_institute_id uuid REFERENCES institute(id);
      UPDATE campaign c SET partner_institute_id = k.institute_id FROM clock k WHERE k.id = c.clock_b_id;
      ALTER TABLE campaign ALTER COLUMN partner_institute_id SET NOT NULL;

      CREATE FUNCTION campaign_partner_institute() RETURNS trigger LANGUAGE plpgsql AS $$
      BEGIN
        NEW.partner_institute_id := (SELECT k.institute_id FROM clock k WHERE k.id = NEW.clock_b_id);
        RETURN NEW;
      END $$;
      CREATE TRIGGER campaign_partner_institute BEFORE INSERT OR UPDATE OF clock_b_id, partner_institute_id ON campaign
        FOR EACH ROW EXECUTE FUNCTION campaign_partner_institute();

      CREATE FUNCTION clock_moves_partner_campaigns() RETURNS trigger LANGUAGE plpgsql AS $$
      BEGIN
        UPDATE campaign SET partner_institute_id = NEW.institute_id WHERE clock_b_id = NEW.id AND partner_institute_id IS DISTINCT FROM NEW.institute_id;
        RETURN NULL;
      END $$;
      CREATE TRIGGER clock_moves_partner_campaigns AFTER UPDATE OF institute_id ON clock
        FOR EACH ROW WHEN (OLD.institute_id IS DISTINCT FROM NEW.institute_id) EXECUTE FUNCTION clock_moves_partner_campaigns();

      CREATE INDEX campaign_partner_institute ON campaign(partner_institute_id);
      CREATE INDEX campaign_state_id ON campaign(state, id);
      CREATE INDEX campaign_state_updated ON campaign(state, updated_at, id);
      DROP INDEX campaign_state;
    `);
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query(`
      CREATE INDEX campaign_state ON campaign(state);
      DROP INDEX campaign_state_updated, campaign_state_id, campaign_partner_institute;
      DROP TRIGGER clock_moves_partner_campaigns ON clock;
      DROP FUNCTION clock_moves_partner_campaigns();
      DROP TRIGGER campaign_partner_institute ON campaign;
      DROP FUNCTION campaign_partner_institute();
      ALTER TABLE campaign DROP COLUMN partner_institute_id;
    `);
  }
}
