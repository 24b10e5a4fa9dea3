import type { MigrationInterface, QueryRunner } from 'typeorm';

// Indexes for every list's filters and sorts, so a page costs an index scan whatever the table size:
// campaigns by updated/name/period (with id as the tie-breaker the lists add), by the second clock's institute
// (operators see campaigns where either clock is theirs), clocks and links by institute and site, benchmarks and
// sections by their list sorts, certificates by issue time, audit events by entity.
export class ListIndexes1765800000000 implements MigrationInterface {
  name = 'ListIndexes1765800000000';

  async up(q: QueryRunner): Promise<void> {
    await q.query(`
      CREATE INDEX IF NOT EXISTS campaign_updated ON campaign(updated_at, id);
      CREATE INDEX IF NOT EXISTS campaign_name ON campaign(name, id);
      CREATE INDEX IF NOT EXISTS campaign_period_start ON campaign(period_start, id);
      CREATE INDEX IF NOT EXISTS campaign_period_end ON campaign(period_end, id);
      CREATE INDEX IF NOT EXISTS campaign_institute_updated ON campaign(institute_id, updated_at, id);
      CREATE INDEX IF NOT EXISTS campaign_clock_a ON campaign(clock_a_id);
      CREATE INDEX IF NOT EXISTS campaign_clock_b ON campaign(clock_b_id);
      CREATE INDEX IF NOT EXISTS clock_institute ON clock(institute_id);
      CREATE INDEX IF NOT EXISTS fibre_link_site_a ON fibre_link(site_a_id);
      CREATE INDEX IF NOT EXISTS fibre_link_site_b ON fibre_link(site_b_id);
      CREATE INDEX IF NOT EXISTS app_user_institute ON app_user(institute_id);
      CREATE INDEX IF NOT EXISTS benchmark_name ON benchmark(name);
      CREATE INDEX IF NOT EXISTS levelling_section_line ON levelling_section(line_name);
    `);
  }

  async down(q: QueryRunner): Promise<void> {
    await q.query(`
      DROP INDEX IF EXISTS campaign_updated, campaign_name, campaign_period_start, campaign_period_end, campaign_institute_updated,
        campaign_clock_a, campaign_clock_b, clock_institute, fibre_link_site_a, fibre_link_site_b, app_user_institute,
        benchmark_name, levelling_section_line;
    `);
  }
}
