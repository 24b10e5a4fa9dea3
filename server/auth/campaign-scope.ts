import type { CampaignState } from '../../shared/campaigns';
import type { Actor } from './actor';

// Who sees which campaign — one rule for detail routes and every aggregate (lists, results, uploads, certificates,
// the network's reconciliation, map and adjustment runs). Written down in docs/decisions/0004-campaign-visibility.md.
//   operator     the campaigns of their own institute (it owns clock A or clock B), in any state
//   coordinator  accepted and certified campaigns, submitted / in-review ones (to review them) and returned ones
//                (reviewed and sent back: the reviewer follows them until they come back)
//   auditor      accepted and certified campaigns
//   admin        as the coordinator
// Anything else is answered as if it did not exist (404), so ids cannot be probed.

export const publishedStates: readonly CampaignState[] = ['accepted', 'certified'];
export const reviewStates: readonly CampaignState[] = ['submitted', 'in_review', 'returned'];

export type CampaignOwnership = { state: CampaignState | string; instituteId: string | null; partnerInstituteId: string | null };

/** The states a role sees across institutes (operators: none beyond their own institute's campaigns). */
export function statesVisibleTo(actor: Actor): readonly CampaignState[] {
  switch (actor.role) {
    case 'operator':
      return [];
    case 'auditor':
      return publishedStates;
    case 'coordinator':
    case 'admin':
      return [...publishedStates, ...reviewStates];
  }
}

export function canSeeCampaign(actor: Actor, c: CampaignOwnership): boolean {
  if (actor.role === 'operator') return !!actor.instituteId && (actor.instituteId === c.instituteId || actor.instituteId === c.partnerInstituteId);
  return (statesVisibleTo(actor) as readonly string[]).includes(c.state);
}

/**
 * The same rule as an SQL condition over the campaign table alone, for lists and counts that must stay index scans:
 * clock B's institute is the campaign's `partner_institute_id`, kept equal to it by triggers (migration
 * 1766110000000-campaign-list-scope). `param` adds a value to the caller's positional parameter list and returns
 * its placeholder ($n).
 */
export function campaignScopeSql(actor: Actor, cols: { state: string; institute: string; partnerInstitute: string }, param: (value: unknown) => string): string {
  const branches = campaignScopeBranches(actor, cols, param);
  return branches.length === 1 ? branches[0] : `(${branches.join(' OR ')})`;
}

/**
 * The same rule as disjoint conditions whose OR is campaignScopeSql: an operator's own institute's campaigns, and
 * the partner institute's campaigns owned by another institute. A list sorted by one column reads each branch in
 * that column's order from its own index and merges them, instead of walking every campaign for the few that match.
 * The second branch is written `partner = X AND partner <> institute` (the same rows as `institute <> X`) so that
 * PostgreSQL can use the partial index campaign_partner_elsewhere (migration CampaignTally) for it.
 */
export function campaignScopeBranches(actor: Actor, cols: { state: string; institute: string; partnerInstitute: string }, param: (value: unknown) => string): string[] {
  if (actor.role === 'operator') {
    const inst = param(actor.instituteId ?? '00000000-0000-0000-0000-000000000000');
    return [`${cols.institute} = ${inst}::uuid`, `(${cols.partnerInstitute} = ${inst}::uuid AND ${cols.partnerInstitute} <> ${cols.institute})`];
  }
  return [`${cols.state} = ANY(${param([...statesVisibleTo(actor)])}::text[])`];
}

/**
 * The same rule as a condition for a query builder (named parameters), given the column expressions of the campaign's
 * state, its owning institute and clock B's institute. Named parameters carry a prefix so they do not clash with the
 * caller's.
 */
export function campaignScopeCondition(actor: Actor, cols: { state: string; institute: string; partnerInstitute: string }): { sql: string; params: Record<string, unknown> } {
  if (actor.role === 'operator') {
    return { sql: `(${cols.institute} = :scopeInstitute OR ${cols.partnerInstitute} = :scopeInstitute)`, params: { scopeInstitute: actor.instituteId ?? '00000000-0000-0000-0000-000000000000' } };
  }
  return { sql: `${cols.state} IN (:...scopeStates)`, params: { scopeStates: [...statesVisibleTo(actor)] } };
}
