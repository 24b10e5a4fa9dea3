import type { EntityManager } from 'typeorm';
import { latestResultForCampaign } from '../results/results.service';

// Reads what the network needs from the registry (sites with their benchmark ties, fibre links, accepted campaigns)
// and from comparison results (latestResultForCampaign). Those tables belong to other features; each read is guarded
// so the network still works, without clocks, on a database where they are absent.

export type SiteTie = {
  id: string; name: string; instituteCode: string; latitudeDeg: number; longitudeDeg: number;
  benchmarkCode: string | null; tieHeightDifferenceM: number | null; tieUncertaintyM: number | null;
};
export type ClockLink = { id: string; name: string; siteAId: string; siteBId: string };
export type AcceptedCampaign = { id: string; name: string; linkId: string; siteAId: string; siteBId: string; state: string; instituteId: string | null; partnerInstituteId: string | null };
/** A clock-derived potential difference C_B − C_A with its combined standard uncertainty. */
export type ClockDeltaC = { campaignId: string; deltaC_m2s2: number; standardUncertainty_m2s2: number };

async function tableExists(m: EntityManager, table: string): Promise<boolean> {
  const r: { t: string | null }[] = await m.query('SELECT to_regclass($1)::text AS t', [`public.${table}`]);
  return r[0]?.t != null;
}

export async function loadSites(m: EntityManager): Promise<SiteTie[]> {
  if (!(await tableExists(m, 'site'))) return [];
  const rows: { id: string; name: string; code: string; lat: number; lon: number; bm: string | null; dh: number | null; u: number | null }[] = await m.query(`
    SELECT s.id, s.name, i.code, s.latitude_deg AS lat, s.longitude_deg AS lon, s.benchmark_code AS bm, s.tie_height_difference_m AS dh, s.tie_u_m AS u
    FROM site s JOIN institute i ON i.id = s.institute_id ORDER BY i.code, s.name`);
  return rows.map((r) => ({ id: r.id, name: r.name, instituteCode: r.code, latitudeDeg: r.lat, longitudeDeg: r.lon, benchmarkCode: r.bm, tieHeightDifferenceM: r.dh, tieUncertaintyM: r.u }));
}

export async function loadLinks(m: EntityManager): Promise<ClockLink[]> {
  if (!(await tableExists(m, 'fibre_link'))) return [];
  const rows: { id: string; name: string; a: string; b: string }[] = await m.query('SELECT id, name, site_a_id AS a, site_b_id AS b FROM fibre_link ORDER BY name');
  return rows.map((r) => ({ id: r.id, name: r.name, siteAId: r.a, siteBId: r.b }));
}

/** Campaigns a coordinator accepted (or certified): clock A's site and clock B's site, through the campaign's link. */
export async function loadAcceptedCampaigns(m: EntityManager): Promise<AcceptedCampaign[]> {
  if (!(await tableExists(m, 'campaign')) || !(await tableExists(m, 'clock'))) return [];
  const rows: { id: string; name: string; link: string; a: string; b: string; state: string; inst: string | null; partner: string | null }[] = await m.query(`
    SELECT c.id, c.name, c.link_id AS link, ca.site_id AS a, cb.site_id AS b, c.state, c.institute_id AS inst, cb.institute_id AS partner
    FROM campaign c JOIN clock ca ON ca.id = c.clock_a_id JOIN clock cb ON cb.id = c.clock_b_id
    WHERE c.state IN ('accepted','certified') ORDER BY c.period_end DESC`);
  return rows.map((r) => ({ id: r.id, name: r.name, linkId: r.link, siteAId: r.a, siteBId: r.b, state: r.state, instituteId: r.inst, partnerInstituteId: r.partner }));
}

/** The clock-derived ΔC = C_B − C_A of a campaign's latest comparison result, with its combined standard uncertainty. */
export async function clockDeltaCFor(m: EntityManager, campaignId: string): Promise<ClockDeltaC | null> {
  if (!(await tableExists(m, 'comparison_result'))) return null;
  const latest = await latestResultForCampaign(m, campaignId);
  if (!latest) return null;
  const dc = latest.result.deltaC_m2s2;
  if (!(dc.standardUncertainty > 0)) return null;
  return { campaignId, deltaC_m2s2: dc.value, standardUncertainty_m2s2: dc.standardUncertainty };
}
