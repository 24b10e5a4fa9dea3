import type { MigrationInterface, QueryRunner } from 'typeorm';

// Transportable clocks and clock networks (docs/transportable-clocks.md):
// - a clock is stationary or transportable; a transportable clock has deployments (site, arrival, departure);
// - a campaign records the sites its clocks stood at during its period (resolved from the deployments when it is
//   created, so every later reader uses the same sites) and its role: remote, or side-by-side with a local tie;
// - a budget version may be tied to the deployment it was evaluated for;
// - a calibration chain joins a remote campaign of a transportable clock with one or two side-by-side campaigns.
export class TransportableClocks1766000000000 implements MigrationInterface {
  name = 'TransportableClocks1766000000000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      ALTER TABLE clock ADD COLUMN mobility text NOT NULL DEFAULT 'stationary' CHECK (mobility IN ('stationary','transportable'));

      CREATE TABLE clock_deployment (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        clock_id uuid NOT NULL REFERENCES clock(id),
        site_id uuid NOT NULL REFERENCES site(id),
        arrived_at timestamptz NOT NULL,
        departed_at timestamptz,
        note text NOT NULL DEFAULT '',
        created_by_user_id uuid,
        created_by text NOT NULL,
        created_at timestamptz NOT NULL DEFAULT now(),
        updated_at timestamptz NOT NULL DEFAULT now(),
        CHECK (departed_at IS NULL OR departed_at > arrived_at)
      );
      CREATE INDEX clock_deployment_clock ON clock_deployment(clock_id, arrived_at);
      CREATE INDEX clock_deployment_site ON clock_deployment(site_id, arrived_at);

      ALTER TABLE clock_budget_version ADD COLUMN deployment_id uuid REFERENCES clock_deployment(id);

      ALTER TABLE campaign ADD COLUMN role text NOT NULL DEFAULT 'remote' CHECK (role IN ('remote','side-by-side'));
      ALTER TABLE campaign ADD COLUMN site_a_id uuid REFERENCES site(id);
      ALTER TABLE campaign ADD COLUMN site_b_id uuid REFERENCES site(id);
      UPDATE campaign c SET site_a_id = ca.site_id, site_b_id = cb.site_id FROM clock ca, clock cb WHERE ca.id = c.clock_a_id AND cb.id = c.clock_b_id;
      ALTER TABLE campaign ALTER COLUMN site_a_id SET NOT NULL;
      ALTER TABLE campaign ALTER COLUMN site_b_id SET NOT NULL;
      -- A row written without sites (stationary clocks, older writers) gets the clocks' registered sites.
      CREATE FUNCTION campaign_default_sites() RETURNS trigger LANGUAGE plpgsql AS $$
      BEGIN
        IF NEW.site_a_id IS NULL THEN NEW.site_a_id := (SELECT site_id FROM clock WHERE id = NEW.clock_a_id); END IF;
        IF NEW.site_b_id IS NULL THEN NEW.site_b_id := (SELECT site_id FROM clock WHERE id = NEW.clock_b_id); END IF;
        RETURN NEW;
      END $$;
      CREATE TRIGGER campaign_default_sites BEFORE INSERT ON campaign FOR EACH ROW EXECUTE FUNCTION campaign_default_sites();
      CREATE INDEX campaign_site_a ON campaign(site_a_id);
      CREATE INDEX campaign_site_b ON campaign(site_b_id);
      -- Side-by-side: the local potential difference C(site B) − C(site A) between the two clocks' reference points,
      -- with its standard uncertainty and where it comes from (the levelling network, a site tie, or entered with a source).
      ALTER TABLE campaign ADD COLUMN local_delta_c_m2s2 float8;
      ALTER TABLE campaign ADD COLUMN local_delta_c_u_m2s2 float8;
      ALTER TABLE campaign ADD COLUMN local_tie_source text;

      CREATE TABLE calibration_chain (
        id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
        name text NOT NULL,
        institute_id uuid NOT NULL REFERENCES institute(id),
        transportable_clock_id uuid NOT NULL REFERENCES clock(id),
        reference_clock_id uuid NOT NULL REFERENCES clock(id),
        remote_campaign_id uuid NOT NULL REFERENCES campaign(id),
        before_campaign_id uuid REFERENCES campaign(id),
        after_campaign_id uuid REFERENCES campaign(id),
        -- Entered transport reproducibility (fractional, standard uncertainty) and its source; null: from before/after.
        transport_reproducibility float8 CHECK (transport_reproducibility IS NULL OR transport_reproducibility >= 0),
        transport_reproducibility_source text,
        notes text NOT NULL DEFAULT '',
        created_by_user_id uuid,
        created_by text NOT NULL,
        created_at timestamptz NOT NULL DEFAULT now(),
        updated_at timestamptz NOT NULL DEFAULT now(),
        CHECK (before_campaign_id IS NOT NULL OR after_campaign_id IS NOT NULL),
        CHECK (before_campaign_id IS DISTINCT FROM after_campaign_id)
      );
      CREATE INDEX calibration_chain_institute ON calibration_chain(institute_id, created_at);
      CREATE INDEX calibration_chain_remote ON calibration_chain(remote_campaign_id);
      CREATE INDEX calibration_chain_before ON calibration_chain(before_campaign_id);
      CREATE INDEX calibration_chain_after ON calibration_chain(after_campaign_id);
    `);
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query(`
      DROP TABLE calibration_chain;
      DROP TRIGGER campaign_default_sites ON campaign;
      DROP FUNCTION campaign_default_sites();
      ALTER TABLE campaign DROP COLUMN local_tie_source, DROP COLUMN local_delta_c_u_m2s2, DROP COLUMN local_delta_c_m2s2,
        DROP COLUMN site_b_id, DROP COLUMN site_a_id, DROP COLUMN role;
      ALTER TABLE clock_budget_version DROP COLUMN deployment_id;
      DROP TABLE clock_deployment;
      ALTER TABLE clock DROP COLUMN mobility;
    `);
  }
}
