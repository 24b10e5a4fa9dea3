import type { EntityManager } from 'typeorm';
import { latestResultForCampaign } from '../results/results.service';
import { C2_M2_PER_S2 } from '../science/constants';

// Reads what the network needs from the registry (sites with their benchmark ties, fibre links, accepted campaigns)
// and from comparison results (latestResultForCampaign). Those tables belong to other features; each read is guarded
// so the network still works, without clocks, on a database where they are absent.

export type SiteTie = {
  id: string; name: string; instituteCode: string; latitudeDeg: number; longitudeDeg: number;
  benchmarkCode: string | null; tieHeightDifferenceM: number | null; tieUncertaintyM: number | null;
  /** A tie given directly as ΔC = C_site − C_benchmark (m²/s²), with σ (m²/s²); null when given as Δh. */
  tieDeltaC_m2s2: number | null; tieUncertaintyC_m2s2: number | null;
};
export type ClockLink = { id: string; name: string; siteAId: string; siteBId: string };
export type AcceptedCampaign = { id: string; name: string; linkId: string; siteAId: string; siteBId: string; state: string; instituteId: string | null; partnerInstituteId: string | null };
/** A systematic term that several campaigns share, in ΔC units: its σ and its coefficient in this campaign's ΔC. */
export type SharedTerm = { name: string; label: string; sigma_m2s2: number; coefficient: number };
/**
 * A clock-derived potential difference C_B − C_A with its combined standard uncertainty, the shared terms in it and
 * the campaign's own part (u_c² minus the shared terms' variances).
 */
export type ClockDeltaC = {
  campaignId: string; deltaC_m2s2: number; standardUncertainty_m2s2: number;
  shared: SharedTerm[]; ownUncertainty_m2s2: number;
  /** Tide system the result is stated in; null when the stored result does not say (then it is not compared). */
  tideSystem: 'mean-tide' | 'zero-tide' | 'tide-free' | null;
};

type StoredResultBody = {
  deltaC_m2s2: { value: number; standardUncertainty: number };
  clockA?: { name?: string; species?: string; budget?: { id?: string; version?: number; totalUncertainty?: number } };
  clockB?: { name?: string; species?: string; budget?: { id?: string; version?: number; totalUncertainty?: number } };
  link?: { id?: string; name?: string; fractionalUncertainty?: number };
  referenceRatio?: { value?: string; relativeUncertainty?: number; source?: string };
  tide?: { system?: string };
};

/**
 * The shared parts of a campaign's ΔC (in m²/s², = c²·u_y): clock A's and clock B's budget versions (sensitivity −1 and
 * +1 in y = ν_B/(ν_A·R0) − 1, so −1 at the from end and +1 at the to end), the fibre link (+1) and, between different
 * species, the reference ratio (∂y/∂ln R0 = −(1 + y) ≈ −1; the pair is named in alphabetical order so A/B and B/A
 * campaigns share one parameter with opposite signs). What remains, √(u_c² − Σ shared²), is the campaign's own part
 * (statistical, tide model, anything not shared). JCGM 100:2008 §5.2 (correlated input quantities) and F.1.2.3.
 */
export function sharedTermsOf(body: StoredResultBody): { shared: SharedTerm[]; own_m2s2: number } {
  const u = body.deltaC_m2s2.standardUncertainty;
  const shared: SharedTerm[] = [];
  const push = (t: SharedTerm) => { if (t.sigma_m2s2 > 0 && Number.isFinite(t.sigma_m2s2)) shared.push(t); };
  const a = body.clockA;
  const b = body.clockB;
  if (a?.budget?.id && a.budget.totalUncertainty !== undefined) {
    push({ name: `budget:${a.budget.id}`, label: `${a.name ?? 'clock A'} budget v${a.budget.version ?? '?'}`, sigma_m2s2: C2_M2_PER_S2 * a.budget.totalUncertainty, coefficient: -1 });
  }
  if (b?.budget?.id && b.budget.totalUncertainty !== undefined) {
    if (a?.budget?.id === b.budget.id) shared.pop(); // the same budget at both ends cancels
    else push({ name: `budget:${b.budget.id}`, label: `${b.name ?? 'clock B'} budget v${b.budget.version ?? '?'}`, sigma_m2s2: C2_M2_PER_S2 * b.budget.totalUncertainty, coefficient: 1 });
  }
  if (body.link?.id && body.link.fractionalUncertainty !== undefined) {
    push({ name: `link:${body.link.id}`, label: `fibre link ${body.link.name ?? body.link.id}`, sigma_m2s2: C2_M2_PER_S2 * body.link.fractionalUncertainty, coefficient: 1 });
  }
  const rr = body.referenceRatio;
  if (a?.species && b?.species && a.species !== b.species && rr?.relativeUncertainty !== undefined) {
    const [first, second] = [a.species, b.species].sort();
    const swapped = first !== a.species;
    push({
      name: `ratio:${first}/${second}`, label: `reference ratio ${first}/${second}${rr.source ? ` (${rr.source})` : ''}`,
      sigma_m2s2: C2_M2_PER_S2 * rr.relativeUncertainty, coefficient: swapped ? 1 : -1,
    });
  }
  const sharedVar = shared.reduce((s, t) => s + t.sigma_m2s2 ** 2, 0);
  // Floor: 1 % of u_c keeps a weight when the budget is all shared (rounding of stored totals).
  const own = Math.sqrt(Math.max(u * u - sharedVar, (0.01 * u) ** 2));
  return { shared, own_m2s2: own };
}

async function tableExists(m: EntityManager, table: string): Promise<boolean> {
  const r: { t: string | null }[] = await m.query('SELECT to_regclass($1)::text AS t', [`public.${table}`]);
  return r[0]?.t != null;
}

export async function loadSites(m: EntityManager): Promise<SiteTie[]> {
  if (!(await tableExists(m, 'site'))) return [];
  const rows: { id: string; name: string; code: string; lat: number; lon: number; bm: string | null; dh: number | null; u: number | null; dc: number | null; uc: number | null }[] = await m.query(`
    SELECT s.id, s.name, i.code, s.latitude_deg AS lat, s.longitude_deg AS lon, s.benchmark_code AS bm, s.tie_height_difference_m AS dh, s.tie_u_m AS u, s.tie_delta_c_m2s2 AS dc, s.tie_u_c_m2s2 AS uc
    FROM site s JOIN institute i ON i.id = s.institute_id ORDER BY i.code, s.name`);
  return rows.map((r) => ({ id: r.id, name: r.name, instituteCode: r.code, latitudeDeg: r.lat, longitudeDeg: r.lon, benchmarkCode: r.bm, tieHeightDifferenceM: r.dh, tieUncertaintyM: r.u, tieDeltaC_m2s2: r.dc, tieUncertaintyC_m2s2: r.uc }));
}

export async function loadLinks(m: EntityManager): Promise<ClockLink[]> {
  if (!(await tableExists(m, 'fibre_link'))) return [];
  const rows: { id: string; name: string; a: string; b: string }[] = await m.query('SELECT id, name, site_a_id AS a, site_b_id AS b FROM fibre_link ORDER BY name');
  return rows.map((r) => ({ id: r.id, name: r.name, siteAId: r.a, siteBId: r.b }));
}

/**
 * Remote campaigns a coordinator accepted (or certified): the sites where clock A and clock B stood during the
 * campaign (from their deployments), through the campaign's link. Side-by-side campaigns measure the offset between
 * two clocks, not a potential difference, so they never enter the adjustment or the reconciliation as one.
 */
export async function loadAcceptedCampaigns(m: EntityManager): Promise<AcceptedCampaign[]> {
  if (!(await tableExists(m, 'campaign')) || !(await tableExists(m, 'clock'))) return [];
  const rows: { id: string; name: string; link: string; a: string; b: string; state: string; inst: string | null; partner: string | null }[] = await m.query(`
    SELECT c.id, c.name, c.link_id AS link, c.site_a_id AS a, c.site_b_id AS b, c.state, c.institute_id AS inst, cb.institute_id AS partner
    FROM campaign c JOIN clock cb ON cb.id = c.clock_b_id
    WHERE c.state IN ('accepted','certified') AND c.role <> 'side-by-side' ORDER BY c.period_end DESC`);
  return rows.map((r) => ({ id: r.id, name: r.name, linkId: r.link, siteAId: r.a, siteBId: r.b, state: r.state, instituteId: r.inst, partnerInstituteId: r.partner }));
}

/** The clock-derived ΔC = C_B − C_A of a campaign's latest comparison result, with its combined standard uncertainty. */
export async function clockDeltaCFor(m: EntityManager, campaignId: string): Promise<ClockDeltaC | null> {
  if (!(await tableExists(m, 'comparison_result'))) return null;
  const latest = await latestResultForCampaign(m, campaignId);
  if (!latest) return null;
  const body = latest.result as unknown as StoredResultBody;
  const dc = body.deltaC_m2s2;
  if (!dc || !(dc.standardUncertainty > 0)) return null;
  const { shared, own_m2s2 } = sharedTermsOf(body);
  const ts = body.tide?.system;
  const tideSystem = ts === 'mean-tide' || ts === 'zero-tide' || ts === 'tide-free' ? ts : null;
  return { campaignId, deltaC_m2s2: dc.value, standardUncertainty_m2s2: dc.standardUncertainty, shared, ownUncertainty_m2s2: own_m2s2, tideSystem };
}
