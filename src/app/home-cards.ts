import type { Role } from '../../shared/auth';

/** What each role's overview page offers; features add their cards here. */
export type HomeCard = { to: string; title: string; text: string; action: string; roles: readonly Role[] };

export const homeCards: HomeCard[] = [
  { to: '/campaigns', title: 'Campaigns', text: 'Open a comparison between two clocks over a fibre link, pin the clocks’ budgets and the reference ratio, and submit it for review.', action: 'Open campaigns', roles: ['operator'] },
  { to: '/clocks', title: 'Clocks, sites and links', text: 'Register your sites with coordinates in any supported system, your clocks with their systematic budgets, and the fibre links between sites.', action: 'Open the registry', roles: ['operator'] },
  { to: '/campaigns', title: 'Campaigns to review', text: 'Start the review of submitted campaigns, accept them or return them to the lab with a reason.', action: 'Open campaigns', roles: ['coordinator'] },
  { to: '/reference-data', title: 'Reference frequencies and quasigeoid grids', text: 'Keep the reference frequencies behind default reference ratios and upload quasigeoid grids for the sites.', action: 'Open reference data', roles: ['coordinator'] },
  { to: '/network', title: 'Levelling network', text: 'Benchmarks, levelling sections, loop misclosures, adjustment runs, the reconciliation of clocks with levelling, and the map.', action: 'Open the network', roles: ['coordinator', 'auditor'] },
  { to: '/admin', title: 'Institutes and people', text: 'Register and edit institutes, change a person’s role, deactivate or reactivate a person.', action: 'Open administration', roles: ['admin'] },
  { to: '/admin/access', title: 'Sessions and tokens', text: 'See everyone’s open browser sessions and API tokens, end a session or revoke a token.', action: 'Open sessions and tokens', roles: ['admin'] },
  { to: '/certificates', title: 'Signed certificates', text: 'Browse issued certificates by institute, period and state; download the signed PDF and its snapshot, and follow each campaign’s audit trail.', action: 'Open certificates', roles: ['auditor', 'coordinator'] },
  { to: '/verify', title: 'Check a certificate file', text: 'Someone sent you a certificate? Upload it to confirm the signature, that the file is unchanged, and whether it was replaced or withdrawn.', action: 'Verify a file', roles: ['auditor'] },
  { to: '/account/tokens', title: 'Scripts and automation', text: 'Create a personal API token to drive Chronolevel from your own scripts.', action: 'Manage tokens', roles: ['operator', 'coordinator', 'auditor', 'admin'] },
];
