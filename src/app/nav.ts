import type { Role } from '../../shared/auth';

/** Navigation entries and which roles see them. Features add their own entries here. */
export type NavItem = { to: string; label: string; roles: readonly Role[]; group: 'work' | 'tools' | 'admin' };

const all: readonly Role[] = ['operator', 'coordinator', 'auditor', 'admin'];
export const navItems: NavItem[] = [
  { to: '/', label: 'Overview', roles: all, group: 'work' },
  { to: '/campaigns', label: 'Campaigns', roles: ['operator', 'coordinator', 'auditor'], group: 'work' },
  { to: '/chains', label: 'Calibration chains', roles: ['operator', 'coordinator', 'auditor'], group: 'work' },
  { to: '/sites', label: 'Sites', roles: ['operator', 'coordinator', 'auditor'], group: 'work' },
  { to: '/clocks', label: 'Clocks', roles: ['operator', 'coordinator', 'auditor'], group: 'work' },
  { to: '/links', label: 'Fibre links', roles: ['operator', 'coordinator', 'auditor'], group: 'work' },
  { to: '/reference-data', label: 'Reference data', roles: ['coordinator'], group: 'work' },
  { to: '/network', label: 'Levelling network', roles: all, group: 'work' },
  { to: '/certificates', label: 'Certificates', roles: all, group: 'work' },
  { to: '/admin', label: 'Institutes and people', roles: ['admin'], group: 'admin' },
  { to: '/admin/access', label: 'Sessions and tokens', roles: ['admin'], group: 'admin' },
  { to: '/admin/mailbox', label: 'Test mailbox', roles: ['admin'], group: 'admin' },
  { to: '/account/tokens', label: 'My API tokens', roles: all, group: 'tools' },
  { to: '/calculator', label: 'Calculator', roles: all, group: 'tools' },
];
