import { z } from 'zod';
import { route } from '../http/route';
import { privilegeWarnings } from '../db/roles';

export const healthRoutes = [
  route({
    method: 'get', path: '/api/health', summary: 'Liveness and database reachability', tag: 'health', permission: 'public',
    response: z.object({ status: z.literal('ok'), database: z.literal('ok'), warnings: z.array(z.string()).optional() }),
    handler: async ({ deps, res }) => {
      try {
        await deps.dataSource.query('SELECT 1');
        // a connection that could rewrite the audit trail still serves, but says so (docs/operations.md, "Database roles")
        const warnings = await privilegeWarnings(deps.dataSource);
        return { status: 'ok', database: 'ok', ...(warnings.length ? { warnings } : {}) };
      } catch (e) {
        res.status(503);
        return { status: 'unavailable', database: 'unreachable', reason: (e as Error).message };
      }
    },
    raw: false,
  }),
];
