import { z } from 'zod';
import { route } from '../http/route';

export const healthRoutes = [
  route({
    method: 'get', path: '/api/health', summary: 'Liveness and database reachability', tag: 'health', permission: 'public',
    response: z.object({ status: z.literal('ok'), database: z.literal('ok') }),
    handler: async ({ deps, res }) => {
      try {
        await deps.dataSource.query('SELECT 1');
        return { status: 'ok', database: 'ok' };
      } catch (e) {
        res.status(503);
        return { status: 'unavailable', database: 'unreachable', reason: (e as Error).message };
      }
    },
    raw: false,
  }),
];
