import { z } from 'zod';
import { isSaturated, poolStats } from '../db/pool-stats';
import { route } from '../http/route';
import { privilegeWarnings } from '../db/roles';
import { replicationHealth } from '../db/replicas';
import { tokenCacheState } from '../tokens/token-cache';

const HEALTH_QUERY_TIMEOUT_MS = 2000;

const replicaSchema = z.object({
  state: z.enum(['ok', 'lagging', 'down', 'not-configured']),
  lagSeconds: z.number().nullable(),
  readsFrom: z.enum(['replicas', 'primary']),
  replicas: z.array(z.object({ name: z.string(), state: z.enum(['ok', 'lagging', 'down']), lagSeconds: z.number().nullable(), reason: z.string().optional() })),
});

const poolSchema = z.object({ max: z.number(), total: z.number(), idle: z.number(), inUse: z.number(), waiting: z.number() });

export const healthRoutes = [
  route({
    method: 'get', path: '/api/health', summary: 'Liveness, database reachability, connection-pool saturation (503 when degraded or unavailable) and the read replicas (reported, never a 503)', tag: 'health', permission: 'public',
    response: z.object({ status: z.enum(['ok', 'degraded', 'unavailable']), database: z.enum(['ok', 'unreachable']), pool: poolSchema.optional(), reason: z.string().optional(), warnings: z.array(z.string()).optional(), replica: replicaSchema,
      /** off while the connection that listens for token changes is down (every token is then read from the database) */
      tokenCache: z.enum(['on', 'off']).optional() }),
    // the probe asks the primary; the standbys are measured by the lag monitor (server/db/replicas.ts)
    db: 'primary',
    handler: async ({ deps, res }) => {
      const pool = poolStats(deps.dataSource) ?? undefined;
      // A lagging or absent standby only moves reads to the primary: reported here, never a reason for a 503.
      const replica = replicationHealth(deps.dataSource);
      const tokenCache = tokenCacheState(deps.dataSource);
      // A saturated pool would make the probe itself queue: report it without asking for a connection.
      if (pool && isSaturated(pool)) {
        res.status(503).json({ status: 'degraded', database: 'ok', pool, reason: `all ${pool.max} database connections are in use; ${pool.waiting} request(s) waiting`, replica, tokenCache });
        return;
      }
      try {
        let timer: NodeJS.Timeout | undefined;
        await Promise.race([
          deps.dataSource.query('SELECT 1'),
          new Promise((_, reject) => (timer = setTimeout(() => reject(new Error(`no answer within ${HEALTH_QUERY_TIMEOUT_MS} ms`)), HEALTH_QUERY_TIMEOUT_MS))),
        ]).finally(() => clearTimeout(timer));
        // a connection that could rewrite the audit trail still serves, but says so (docs/operations.md, "Database roles")
        const warnings = await privilegeWarnings(deps.dataSource);
        res.status(200).json({ status: 'ok', database: 'ok', pool, ...(warnings.length ? { warnings } : {}), replica, tokenCache });
      } catch (e) {
        res.status(503).json({ status: 'unavailable', database: 'unreachable', pool, reason: (e as Error).message, replica, tokenCache });
      }
    },
    raw: true,
  }),
  // For load balancers: "this process answers HTTP". It never touches the database and never degrades under load,
  // so a balancer that checks it keeps a busy process in rotation; /api/health stays the honest readiness report.
  route({
    method: 'get', path: '/api/live', summary: 'Liveness for load balancers: the process answers (no database access; never 503 under load)', tag: 'health', permission: 'public',
    response: z.object({ status: z.literal('alive'), uptimeSeconds: z.number() }),
    handler: async ({ res }) => {
      res.status(200).json({ status: 'alive', uptimeSeconds: Math.round(process.uptime()) });
    },
    raw: true,
  }),
];
