import type { Role } from '../../shared/auth';

/** What each role's overview page offers; features add their cards here. */
export type HomeCard = { to: string; title: string; text: string; action: string; roles: readonly Role[] };

export const homeCards: HomeCard[] = [
  { to: '/network', title: 'Levelling network', text: 'Benchmarks, levelling sections, loop misclosures, adjustment runs, the reconciliation of clocks with levelling, and the map.', action: 'Open the network', roles: ['coordinator', 'auditor'] },
  { to: '/admin', title: 'Institutes and people', text: 'Register institutes and check who has which role.', action: 'Open administration', roles: ['admin'] },
  { to: '/certificates', title: 'Signed certificates', text: 'Browse issued certificates by institute, period and state; download the signed PDF and its snapshot, and follow each campaign’s audit trail.', action: 'Open certificates', roles: ['auditor', 'coordinator'] },
  { to: '/verify', title: 'Check a certificate file', text: 'Someone sent you a certificate? Upload it to confirm the signature, that the file is unchanged, and whether it was replaced or withdrawn.', action: 'Verify a file', roles: ['auditor'] },
  { to: '/account/tokens', title: 'Scripts and automation', text: 'Create a personal API token to drive Chronolevel from your own scripts.', action: 'Manage tokens', roles: ['operator', 'coordinator', 'auditor', 'admin'] },
];
