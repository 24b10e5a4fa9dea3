import { calcAdjustBodySchema, calcAdjustResultSchema } from '../../shared/network';
import { route } from '../http/route';
import { calcAdjust } from './adjustment.service';

// The stateless adjustment calculator: send points and observations, get adjusted values; nothing is stored.
export const adjustCalcRoutes = [
  route({
    method: 'post', path: '/api/v1/calc/adjust', summary: 'Least-squares adjustment of a small levelling network (stateless)', tag: 'calculators', permission: 'calc:use',
    body: calcAdjustBodySchema, response: calcAdjustResultSchema,
    handler: async ({ actor, body }) => calcAdjust(actor, body),
  }),
];
