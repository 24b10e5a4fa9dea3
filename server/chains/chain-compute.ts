import type { EntityManager } from 'typeorm';
import type { ChainResult } from '../../shared/chains';
import type { ResultBody } from '../../shared/results';
import { coverageText } from '../../shared/number-text';
import { CalibrationChainEntity, CampaignEntity, ClockEntity, SiteEntity, type CalibrationChainRow, type CampaignRow } from '../db/entities/registry.entities';
import { latestResultForCampaign } from '../results/results.service';
import { calibrationChain, type ChainComparison, type ChainInputTerm } from '../science/calibration-chain';
import { ScienceInputError } from '../science/errors';
import { cFromNormalHeight, meanNormalGravity, normalHeightFromC } from '../science/normal-gravity';
import { canSeeCampaign, publishedStates } from '../auth/campaign-scope';
import type { Actor } from '../auth/actor';
import { normalHeightOf } from '../registry/registry.service';

// Reads a chain's campaigns and their latest comparison results, turns each result's budget into chain inputs (naming
// the quantities other comparisons share the same way the network adjustment does) and runs the pure chain arithmetic.

export type ChainCampaigns = { remote: CampaignRow; before: CampaignRow | null; after: CampaignRow | null };

export async function loadChainCampaigns(m: EntityManager, row: CalibrationChainRow): Promise<ChainCampaigns> {
  const ids = [row.remoteCampaignId, row.beforeCampaignId, row.afterCampaignId].filter((x): x is string => !!x);
  const rows = await m.getRepository(CampaignEntity).find({ where: ids.map((id) => ({ id })), relations: { clockB: true } });
  const byId = new Map(rows.map((r) => [r.id, r]));
  return {
    remote: byId.get(row.remoteCampaignId)!,
    before: row.beforeCampaignId ? byId.get(row.beforeCampaignId) ?? null : null,
    after: row.afterCampaignId ? byId.get(row.afterCampaignId) ?? null : null,
  };
}

export const campaignOwnership = (c: CampaignRow) => ({ state: c.state, instituteId: c.instituteId, partnerInstituteId: c.clockB?.instituteId ?? null });
/** A chain is visible to whoever may see every one of its campaigns (server/auth/campaign-scope.ts). */
export const canSeeChain = (actor: Actor, cs: ChainCampaigns) => [cs.remote, cs.before, cs.after].every((c) => !c || canSeeCampaign(actor, campaignOwnership(c)));

export const chainAccepted = (c: ChainCampaigns) => [c.remote, c.before, c.after].every((x) => !x || (publishedStates as readonly string[]).includes(x.state));

/** A key for a quantity shared between comparisons (the adjustment's names: budget:…, link:…, ratio:…). */
function termsOf(body: ResultBody): ChainInputTerm[] {
  const a = body.clockA;
  const b = body.clockB;
  const [first, second] = [a.species, b.species].sort();
  const swapped = first !== a.species;
  return body.budget.lines.map((l) => {
    let key: string | null = null;
    let sensitivity = l.sensitivity;
    if (l.component.startsWith('Clock A systematic')) key = `budget:${a.budget.id}`;
    else if (l.component.startsWith('Clock B systematic')) key = `budget:${b.budget.id}`;
    else if (l.component.startsWith('Fibre link')) key = `link:${body.link.id}`;
    else if (l.component.startsWith('Reference ratio')) {
      key = `ratio:${first}/${second}`;
      // The campaign's R0 is ν_B0/ν_A0; against the alphabetical pair its logarithm changes sign when swapped.
      if (swapped) sensitivity = -sensitivity;
    }
    const dof = l.type === 'A' && l.component.startsWith('Statistical') ? body.fractionalOffset.statisticalDegreesOfFreedom ?? undefined : undefined;
    return { key, label: l.component, type: l.type, standardUncertainty: l.standardUncertainty, sensitivity, unit: l.unit, degreesOfFreedom: dof };
  });
}

export class ChainNotReady extends Error {
  constructor(readonly missing: { campaignId: string; name: string }[]) {
    super(`No computed result yet for ${missing.map((x) => x.name).join(', ')}: the chain is computed from its campaigns’ results.`);
  }
}

const SUPERSCRIPT = new Map<string, string>([...[...'0123456789'].map((d, i): [string, string] => [d, '⁰¹²³⁴⁵⁶⁷⁸⁹'[i]]), ['-', '⁻'], ['+', '']]);
/** 4.14×10⁻¹⁸ */
const fmtE = (x: number, d = 2) => {
  const [m, e] = x.toExponential(d).split('e');
  return `${m.replace('-', '−')}×10${[...e].map((ch) => SUPERSCRIPT.get(ch) ?? ch).join('')}`;
};

export async function computeChain(m: EntityManager, row: CalibrationChainRow, cs?: ChainCampaigns): Promise<ChainResult> {
  const c = cs ?? await loadChainCampaigns(m, row);
  const parts = ([['remote', c.remote], ['before', c.before], ['after', c.after]] as const).filter((x): x is ['remote' | 'before' | 'after', CampaignRow] => x[1] !== null);
  // one after the other: `m` may be a transaction's manager, whose one connection takes one query at a time
  const results: Awaited<ReturnType<typeof latestResultForCampaign>>[] = [];
  for (const [, cmp] of parts) results.push(await latestResultForCampaign(m, cmp.id));
  const missing = parts.filter((_, i) => !results[i]).map(([, cmp]) => ({ campaignId: cmp.id, name: cmp.name }));
  if (missing.length) throw new ChainNotReady(missing);
  const clockIds = [row.transportableClockId, row.referenceClockId];
  const clocks = new Map((await m.getRepository(ClockEntity).find({ where: clockIds.map((id) => ({ id })) })).map((x) => [x.id, x]));
  const T = clocks.get(row.transportableClockId)!;
  const comparisons = new Map<string, ChainComparison>();
  parts.forEach(([part, cmp], i) => {
    const body = results[i]!.result;
    // The same ordered pair of sites is the same tie in both calibrations (a reversed pair is counted as another one).
    const tieKey = `tie:${cmp.siteAId}:${cmp.siteBId}`;
    comparisons.set(part, {
      id: cmp.id, name: cmp.name, y: body.fractionalOffset.y, transportableIs: cmp.clockAId === T.id ? 'A' : 'B', terms: termsOf(body),
      localTie: part === 'remote' ? null : {
        deltaC_m2s2: cmp.localDeltaC_m2s2 ?? 0, standardUncertainty_m2s2: cmp.localDeltaCUncertainty_m2s2 ?? 0,
        key: tieKey, source: cmp.localTieSource ?? (cmp.siteAId === cmp.siteBId ? 'same site: no local potential difference' : 'not stated'),
      },
    });
  });
  const r = calibrationChain({
    remote: comparisons.get('remote')!, before: comparisons.get('before') ?? null, after: comparisons.get('after') ?? null,
    transportReproducibility: row.transportReproducibility === null ? null : { standardUncertainty: row.transportReproducibility, source: row.transportReproducibilitySource ?? 'entered' },
  });
  // Sites: the partner clock's site (from) and T's remote site (to).
  const remote = c.remote;
  const tIsA = remote.clockAId === T.id;
  const fromSiteId = tIsA ? remote.siteBId : remote.siteAId;
  const toSiteId = tIsA ? remote.siteAId : remote.siteBId;
  const sites = new Map((await m.getRepository(SiteEntity).find({ where: [{ id: fromSiteId }, { id: toSiteId }] })).map((s) => [s.id, s]));
  const from = sites.get(fromSiteId)!;
  const to = sites.get(toSiteId)!;
  const hFrom = normalHeightOf(from).valueM;
  const cFrom = cFromNormalHeight(hFrom, from.latitudeDeg);
  const hTo = normalHeightFromC(cFrom + r.deltaC_m2s2, to.latitudeDeg);
  const gamma = meanNormalGravity(to.latitudeDeg, hTo);
  const coverage = { coverageFactor: r.coverageFactor, coverageProbability: r.coverageProbability, effectiveDegreesOfFreedom: r.effectiveDegreesOfFreedom };
  const name = new Map(parts.map(([, cmp]) => [cmp.id, cmp.name]));
  const cautions: string[] = [];
  if (r.beforeAfter && !r.beforeAfter.agreed) cautions.push(`The before and after calibrations differ by more than their expanded uncertainty (|Eₙ| = ${Math.abs(r.beforeAfter.en).toFixed(2)} > 1): T changed during the transport; the transport term carries that change, check the clock’s logs before using the chain.`);
  const trShare = r.lines.find((l) => l.key === 'transport')?.varianceShare ?? 0;
  if (trShare > 0.5) cautions.push(`The transport reproducibility dominates the chain (${(100 * trShare).toFixed(0)} % of u_c²).`);
  const notCancelled = r.lines.filter((l) => l.key === `budget:${results[0]!.result[tIsA ? 'clockA' : 'clockB'].budget.id}` && !l.cancels);
  if (notCancelled.length) cautions.push('T’s budget version differs between the comparisons (re-evaluated at a site): its terms do not cancel and enter in full.');
  cautions.push('Results feeding height-datum decisions: verify against your national datum authority and your lab’s quality procedures.');
  const en = r.beforeAfter;
  return {
    chainId: row.id, chainName: row.name,
    inputs: parts.map(([part, cmp], i) => ({
      campaignId: cmp.id, campaign: cmp.name, part, resultId: results[i]!.id, computedAt: results[i]!.computedAt, y: results[i]!.result.fractionalOffset.y,
      standardUncertaintyY: results[i]!.result.fractionalOffset.standardUncertainty, transportableIs: comparisons.get(part)!.transportableIs,
    })),
    fromSite: { id: from.id, name: from.name }, toSite: { id: to.id, name: to.name },
    yRemote: r.yRemote, ySideBySide: r.ySideBySide, yChain: r.yChain,
    deltaC_m2s2: { value: r.deltaC_m2s2, standardUncertainty: r.standardUncertainty_m2s2, expandedUncertainty: r.expandedUncertainty_m2s2, ...coverage, unit: 'm2/s2' },
    deltaH_m: {
      value: hTo - hFrom, standardUncertainty: r.standardUncertainty_m2s2 / gamma, expandedUncertainty: r.expandedUncertainty_m2s2 / gamma, ...coverage, unit: 'm',
      method: 'H_to = C_to/γ̄ with C_to = C_from + ΔC, C_from = H_from·γ̄_from (GRS80 mean normal gravity, Heiskanen & Moritz 1967 eq. 4-42); normal heights.',
    },
    calibrations: r.calibrations.map((cal) => {
      const cmp = cal.which === 'before' ? c.before! : c.after!;
      return { ...cal, localTie: { deltaC_m2s2: cmp.localDeltaC_m2s2 ?? 0, standardUncertainty_m2s2: cmp.localDeltaCUncertainty_m2s2 ?? 0, source: comparisons.get(cal.which)!.localTie!.source } };
    }),
    transport: r.transport,
    beforeAfter: en ? {
      ...en, coverageFactor: 2,
      statement: `${en.agreed ? 'Consistent' : 'Not consistent'}: d = o_after − o_before = ${fmtE(en.difference)} with U(d) = ${fmtE(en.expandedUncertainty)} (k = 2, p ≈ 95 %), Eₙ = ${en.en.toFixed(2)}.`,
    } : null,
    lines: r.lines.map((l) => ({ ...l, enters: l.enters.map((e) => ({ ...e, comparison: name.get(e.comparisonId) ?? e.comparisonId })) })),
    covariances: r.covariances,
    own_m2s2: r.own_m2s2, shared: r.shared,
    tideSystem: 'mean-tide',
    cancellation: notCancelled.length
      ? `${T.name}’s budget version differs between the remote comparison and its calibrations, so its systematic offset does not cancel: both versions enter the budget in full. The reference clock’s terms cancel where it is the same budget version in every comparison.`
      : `${T.name} is in every comparison of the chain with the same sign once each comparison is read as “${T.name} relative to its partner”. Its systematic offset b_T (and that of the reference clock) is the same input quantity in the remote comparison and in the side-by-side calibration, with sensitivities +c² and −c²·(w_before + w_after) = −c², so it cancels exactly: it appears in the budget with sensitivity 0. What T does not keep constant between calibration and remote comparison enters as the transport reproducibility term.`,
    method: {
      statement: `ΔC = c²·(y_remote − ȳ_side-by-side), ȳ = weighted mean of the calibrated offsets o = y − ΔC_local/c² (weights inverse to the variance the calibrations do not share); shared inputs grouped into one quantity each (law of propagation for correlated inputs), Welch–Satterthwaite ν_eff and k = t_p(ν_eff); ${coverageText(coverage)}.`,
      sources: ['JCGM 100:2008 (GUM) §5.2.2 eq. (13), §4.3.7, G.4.1, G.3', 'Mehlstäubler et al. 2018, Rep. Prog. Phys. 81:064401 (chronometric levelling)', 'ISO 13528:2015 §9.7 (Eₙ)', 'Heiskanen & Moritz 1967, Physical Geodesy, ch. 4'],
    },
    assumptions: [
      'Each comparison’s y is its own stored result: the periodic solid-Earth tide at each site removed sample by sample (mean-tide, permanent part kept).',
      'The transportable clock’s systematic offset is the same during the remote comparison and the calibrations except for the transport reproducibility term.',
      'Inputs with the same name in several comparisons (budget versions, fibre links, reference ratios, local ties) are the same quantity (correlation +1); all other inputs are independent.',
      r.transport.origin === 'before-after'
        ? 'Transport reproducibility from the before/after difference: a rectangular distribution between the two offsets, ν = 2 (our judgement of its reliability).'
        : `Transport reproducibility entered: ${fmtE(r.transport.standardUncertainty)} (${r.transport.source}).`,
    ],
    cautions,
  };
}

export async function loadChainRow(m: EntityManager, id: string) {
  return m.getRepository(CalibrationChainEntity).findOne({ where: { id } });
}

export { ScienceInputError };

/** Chains whose campaigns are all accepted or certified: these enter the network adjustment and the reconciliation. */
export async function loadAcceptedChains(m: EntityManager): Promise<{ row: CalibrationChainRow; campaigns: ChainCampaigns }[]> {
  const r: { t: string | null }[] = await m.query("SELECT to_regclass('public.calibration_chain')::text AS t");
  if (r[0]?.t == null) return [];
  const rows = await m.getRepository(CalibrationChainEntity).find({ order: { createdAt: 'ASC', id: 'ASC' } });
  const out: { row: CalibrationChainRow; campaigns: ChainCampaigns }[] = [];
  for (const row of rows) {
    const campaigns = await loadChainCampaigns(m, row);
    if (chainAccepted(campaigns)) out.push({ row, campaigns });
  }
  return out;
}
