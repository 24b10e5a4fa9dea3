import type { Role } from '../../shared/auth';

/** What each role's overview page offers; features add their cards here. */
export type HomeCard = { to: string; title: string; text: string; action: string; roles: readonly Role[] };

export const homeCards: HomeCard[] = [
  { to: '/admin', title: 'Institutes and people', text: 'Register institutes and check who has which role.', action: 'Open administration', roles: ['admin'] },
  { to: '/account/tokens', title: 'Scripts and automation', text: 'Create a personal API token to drive Chronolevel from your own scripts.', action: 'Manage tokens', roles: ['operator', 'coordinator', 'auditor', 'admin'] },
];
