import type { RouteObject } from 'react-router';
import { TokensPage } from '../pages/account/tokens-page';
import { AdminPage } from '../pages/admin/admin-page';
import { MailboxPage } from '../pages/admin/mailbox-page';
import { AccessPage } from '../pages/admin/access-page';
import { HomePage } from '../pages/home-page';
import { CalculatorPage } from '../pages/calculator/calculator-page';
import { ResultsPage } from '../pages/results/results-page';
import { NotFoundPage } from '../pages/not-found-page';
import { CampaignAuditPage } from '../pages/audit/campaign-audit-page';
import { CertificatePage } from '../pages/certificates/certificate-page';
import { CertificatesPage } from '../pages/certificates/certificates-page';
import { NetworkPage } from '../pages/network/network-page';
import { SectionsPage } from '../pages/network/sections-page';
import { LoopsPage } from '../pages/network/loops-page';
import { RunsPage } from '../pages/network/runs-page';
import { RunPage } from '../pages/network/run-page';
import { ReconciliationPage } from '../pages/network/reconciliation-page';
import { MapPage } from '../pages/network/map-page';
import { BenchmarkPage } from '../pages/network/benchmark-page';
import { ClosuresPage } from '../pages/network/closures-page';
import { ClosurePage } from '../pages/network/closure-page';
import { SitesPage } from '../pages/registry/sites-page';
import { SitePage } from '../pages/registry/site-page';
import { ClocksPage } from '../pages/registry/clocks-page';
import { ClockPage } from '../pages/registry/clock-page';
import { LinkPage, LinksPage } from '../pages/registry/links-page';
import { ReferenceDataPage } from '../pages/registry/reference-data-page';
import { CampaignsPage } from '../pages/campaigns/campaigns-page';
import { CampaignPage } from '../pages/campaigns/campaign-page';
import { ChainsPage } from '../pages/chains/chains-page';
import { ChainPage } from '../pages/chains/chain-page';

/** Client routes; features add theirs here (and a nav entry in nav.ts). */
export const featureRoutes: RouteObject[] = [
  { index: true, element: <HomePage /> },
  { path: 'admin', element: <AdminPage /> },
  { path: 'admin/mailbox', element: <MailboxPage /> },
  { path: 'admin/access', element: <AccessPage /> },
  { path: 'account/tokens', element: <TokensPage /> },
  { path: 'certificates', element: <CertificatesPage /> },
  { path: 'certificates/:number', element: <CertificatePage /> },
  { path: 'audit/campaigns/:id', element: <CampaignAuditPage /> },
  { path: 'calculator', element: <CalculatorPage /> },
  { path: 'campaigns/:id/results', element: <ResultsPage /> },
  { path: 'network', element: <NetworkPage /> },
  { path: 'network/sections', element: <SectionsPage /> },
  { path: 'network/loops', element: <LoopsPage /> },
  { path: 'network/runs', element: <RunsPage /> },
  { path: 'network/runs/:id', element: <RunPage /> },
  { path: 'network/reconciliation', element: <ReconciliationPage /> },
  { path: 'network/map', element: <MapPage /> },
  { path: 'network/closures', element: <ClosuresPage /> },
  { path: 'network/closures/:id', element: <ClosurePage /> },
  { path: 'network/benchmarks/:id', element: <BenchmarkPage /> },
  { path: 'sites', element: <SitesPage /> },
  { path: 'sites/:id', element: <SitePage /> },
  { path: 'clocks', element: <ClocksPage /> },
  { path: 'clocks/:id', element: <ClockPage /> },
  { path: 'links', element: <LinksPage /> },
  { path: 'links/:id', element: <LinkPage /> },
  { path: 'reference-data', element: <ReferenceDataPage /> },
  { path: 'campaigns', element: <CampaignsPage /> },
  { path: 'campaigns/:id', element: <CampaignPage /> },
  { path: 'chains', element: <ChainsPage /> },
  { path: 'chains/:id', element: <ChainPage /> },
  { path: '*', element: <NotFoundPage /> },
];
