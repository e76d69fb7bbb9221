import type { FastifyInstance } from 'fastify';
import { SourceboundError } from '../errors.js';
import { keyAccess, PUBLIC, type RouteRecord } from './access.js';

/** The methods a route of this service may have; any of them on a known path with another method is 405. */
const METHODS = ['GET', 'POST', 'PUT', 'DELETE', 'PATCH'] as const;

/**
 * For every path the app serves, routes for the methods it does not serve there, answering
 * `405 SB_ERR_METHOD_NOT_ALLOWED` with an `Allow` header. They are routes the router matches, so the answer is
 * decided on the matched route, never on the URL's text (`/v1/%61nswer` is the same path to both). They admit
 * a key of any scope (for the collection in the path, where there is one) or, on a public path, anyone, so
 * they reveal nothing to a caller without a key. Call last, once every real route is registered; they stay out of the
 * route table (`config.methodNotAllowed`).
 */
export function registerMethodNotAllowed(r: FastifyInstance, table: readonly RouteRecord[]): void {
  const byPath = new Map<string, RouteRecord[]>();
  for (const route of table) byPath.set(route.url, [...(byPath.get(route.url) ?? []), route]);
  for (const [url, routes] of byPath) {
    const allowed = new Set(routes.map((x) => x.method));
    if (allowed.has('GET')) allowed.add('HEAD');
    const missing = METHODS.filter((m) => !allowed.has(m));
    if (missing.length === 0) continue;
    const open = routes.some((x) => x.access?.kind !== 'key');
    // A collection in the path is checked as the path's routes check it: a key for another collection is
    // refused as it would be there.
    const inPath = routes.some((x) => x.access?.kind === 'key' && x.access.collection.in === 'path');
    const access = open ? PUBLIC : keyAccess(['query', 'ingest', 'admin'], 'use this route', inPath ? { in: 'path' } : { in: 'own' }, { whileLoading: true });
    const allow = [...allowed].sort().join(', ');
    r.route({
      method: [...missing],
      url,
      config: { access, methodNotAllowed: true },
      handler: async (req, reply) => {
        void reply.header('allow', allow);
        throw new SourceboundError('SB_ERR_METHOD_NOT_ALLOWED', [req.method]);
      },
    });
  }
}
