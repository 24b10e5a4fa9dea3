import type { RouteObject } from 'react-router';
import { TokensPage } from '../pages/account/tokens-page';
import { AdminPage } from '../pages/admin/admin-page';
import { MailboxPage } from '../pages/admin/mailbox-page';
import { HomePage } from '../pages/home-page';
import { CalculatorPage } from '../pages/calculator/calculator-page';
import { NotFoundPage } from '../pages/not-found-page';
import { CampaignAuditPage } from '../pages/audit/campaign-audit-page';
import { CertificatePage } from '../pages/certificates/certificate-page';
import { CertificatesPage } from '../pages/certificates/certificates-page';

/** Client routes; features add theirs here (and a nav entry in nav.ts). */
export const featureRoutes: RouteObject[] = [
  { index: true, element: <HomePage /> },
  { path: 'admin', element: <AdminPage /> },
  { path: 'admin/mailbox', element: <MailboxPage /> },
  { path: 'account/tokens', element: <TokensPage /> },
  { path: 'certificates', element: <CertificatesPage /> },
  { path: 'certificates/:number', element: <CertificatePage /> },
  { path: 'audit/campaigns/:id', element: <CampaignAuditPage /> },
  { path: 'calculator', element: <CalculatorPage /> },
  { path: '*', element: <NotFoundPage /> },
];
