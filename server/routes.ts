import type { RouteSpec } from './http/route';
import { healthRoutes } from './health/health.routes';
import { foundationRoutes } from './me/me.routes';
import { registryRoutes } from './registry/registry.routes';
import { campaignRoutes } from './campaigns/campaigns.routes';
import { uploadRoutes } from './uploads/uploads.routes';
import { calcRoutes } from './calc/calc.routes';
import { resultsRoutes } from './results/results.routes';
import { networkRoutes } from './network/network.routes';
import { adjustCalcRoutes } from './network/adjust.routes';
import { certificateRoutes } from './certificates/certificates.routes';
import { mailOutboxRoutes } from './mail/outbox.routes';
import { pkiRoutes } from './certificates/pki.routes';
import { measuredRatioRoutes } from './registry/measured-ratios';
import { chainRoutes } from './chains/chains.routes';
import { closureRoutes } from './closures/closures.routes';

// Every API route of the product, in one list: Express, OpenAPI and the access tests read it.
// Feature folders export their own arrays; add them here.
export const apiRoutes: RouteSpec[] = [...healthRoutes, ...foundationRoutes, ...calcRoutes, ...resultsRoutes, ...networkRoutes, ...adjustCalcRoutes, ...registryRoutes, ...campaignRoutes, ...uploadRoutes, ...certificateRoutes, ...mailOutboxRoutes, ...pkiRoutes, ...measuredRatioRoutes, ...chainRoutes, ...closureRoutes];
