import fs from 'node:fs';
import path from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';
import type { EntityManager } from 'typeorm';

// Reads what the network needs from the registry (sites with their benchmark ties, fibre links, accepted campaigns)
// and from comparison results. Those tables belong to other features; each read is guarded so the network works
// (without clocks) on a database where they are absent.

export type SiteTie = {
  id: string; name: string; instituteCode: string; latitudeDeg: number; longitudeDeg: number;
  benchmarkCode: string | null; tieHeightDifferenceM: number | null; tieUncertaintyM: number | null;
};
export type ClockLink = { id: string; name: string; siteAId: string; siteBId: string };
export type AcceptedCampaign = { id: string; name: string; linkId: string; siteAId: string; siteBId: string; state: string };
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
  const rows: { id: string; name: string; link: string; a: string; b: string; state: string }[] = await m.query(`
    SELECT c.id, c.name, c.link_id AS link, ca.site_id AS a, cb.site_id AS b, c.state
    FROM campaign c JOIN clock ca ON ca.id = c.clock_a_id JOIN clock cb ON cb.id = c.clock_b_id
    WHERE c.state IN ('accepted','certified') ORDER BY c.period_end DESC`);
  return rows.map((r) => ({ id: r.id, name: r.name, linkId: r.link, siteAId: r.a, siteBId: r.b, state: r.state }));
}

type LatestFn = (m: EntityManager, campaignId: string) => Promise<unknown>;
let latestFn: LatestFn | null | undefined;

/** Finds `latestResultForCampaign` exported by a module of server/results (the results feature), once. */
async function findLatestResultFn(): Promise<LatestFn | null> {
  if (latestFn !== undefined) return latestFn;
  latestFn = null;
  const dir = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '../results');
  if (!fs.existsSync(dir)) return null;
  for (const f of fs.readdirSync(dir).filter((n) => /\.ts$|\.js$/.test(n) && !n.endsWith('.d.ts')).sort()) {
    const mod = (await import(pathToFileURL(path.join(dir, f)).href)) as Record<string, unknown>;
    if (typeof mod.latestResultForCampaign === 'function') {
      latestFn = mod.latestResultForCampaign as LatestFn;
      break;
    }
  }
  return latestFn;
}

function numberIn(o: unknown, keys: string[]): number | null {
  if (!o || typeof o !== 'object') return null;
  const rec = o as Record<string, unknown>;
  for (const k of keys) {
    const v = rec[k];
    if (typeof v === 'number' && Number.isFinite(v)) return v;
    if (typeof v === 'string' && v.trim() !== '' && Number.isFinite(Number(v))) return Number(v);
  }
  return null;
}

/**
 * The clock-derived ΔC of a campaign's latest result, when the results feature provides one. The result's own
 * field names are read tolerantly: a ΔC value (or { value, uncertainty }) and its combined standard uncertainty.
 */
export async function clockDeltaCFor(m: EntityManager, campaignId: string): Promise<ClockDeltaC | null> {
  const fn = await findLatestResultFn();
  if (!fn) return null;
  const r = (await fn(m, campaignId)) as Record<string, unknown> | null;
  if (!r) return null;
  const dc = r.deltaC_m2s2 ?? r.deltaC ?? r.potentialDifference;
  let value = typeof dc === 'number' ? dc : numberIn(dc, ['value', 'value_m2s2', 'deltaC_m2s2']);
  let u = numberIn(dc, ['uncertainty', 'standardUncertainty', 'combinedStandardUncertainty', 'u']);
  value ??= numberIn(r, ['deltaC_m2s2', 'deltaCValue_m2s2']);
  u ??= numberIn(r, ['deltaCUncertainty_m2s2', 'uDeltaC_m2s2', 'deltaC_u_m2s2', 'combinedStandardUncertainty_m2s2']);
  const k = numberIn(dc, ['k', 'coverageFactor']);
  if (value === null || u === null || !(u > 0)) return null;
  return { campaignId, deltaC_m2s2: value, standardUncertainty_m2s2: k && k !== 1 ? u / k : u };
}
