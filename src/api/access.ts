import type { FastifyInstance, FastifyReply, FastifyRequest } from 'fastify';
import { SourceboundError } from '../errors.js';
import type { Logger } from '../logger.js';
import { ANONYMOUS, NOBODY, requireCollection, type Authenticator, type Principal, type Scope } from './auth.js';
import type { Metrics } from './metrics.js';
import { addressBucket, type RateLimiter } from './rate-limit.js';
import { COLLECTION_NAME, COLLECTION_NAME_RULE } from './schemas.js';

// Access control decided on the route the router matched, never on the raw URL: every route states in
// its own options who may call it (`config: { access }`), and the hooks below read that statement.
// A route that states nothing is refused, so forgetting the declaration closes a route instead of
// opening it.

/** Where the collection a request acts on comes from. */
export type CollectionSource =
  /** the `:collection` path parameter, checked before the body is read */
  | { in: 'path' }
  /** the body's `collection` field, checked once the body is parsed and before the handler runs;
   *  when it is absent: the default collection, or (`own`) the key's own collections */
  | { in: 'body'; absent: 'default' | 'own' }
  /** none named: the handler narrows what it shows or does to the key's own collections */
  | { in: 'own' };

export type RouteAccess =
  /** open to anyone: no key, nothing counted (health probes, the desk page and its assets) */
  | { kind: 'public' }
  /** no key: the request carries a signed link that the handler redeems; counted per client address */
  | { kind: 'signed-link' }
  | {
      kind: 'key';
      /** any one of these scopes admits the key */
      scopes: readonly Scope[];
      /** for the refusal: "This API key may not <action>" */
      action: string;
      collection: CollectionSource;
      /** served before the index has loaded (only /metrics) */
      whileLoading?: boolean;
    };

export const PUBLIC: RouteAccess = { kind: 'public' };
export const SIGNED_LINK: RouteAccess = { kind: 'signed-link' };

export function keyAccess(
  scopes: Scope | readonly Scope[],
  action: string,
  collection: CollectionSource,
  opts: { whileLoading?: boolean } = {},
): RouteAccess {
  return { kind: 'key', scopes: typeof scopes === 'string' ? [scopes] : scopes, action, collection, ...opts };
}

declare module 'fastify' {
  interface FastifyContextConfig {
    access?: RouteAccess;
    /** A route that only answers 405 for a method its path does not serve (src/api/method-not-allowed.ts). */
    methodNotAllowed?: boolean;
  }
  interface FastifyRequest {
    principal: Principal;
    /** The one collection the access hooks let this request act on; null when the route names none. */
    grantedCollection: string | null;
  }
}

/** One registered route and what it declared, as the router holds it. */
export interface RouteRecord {
  method: string;
  url: string;
  access: RouteAccess | undefined;
}

const tables = new WeakMap<FastifyInstance, RouteRecord[]>();

/** Every route of an app built by buildApp, with its declaration (complete once the app is ready). */
export function routeTable(app: FastifyInstance): readonly RouteRecord[] {
  return tables.get(app) ?? [];
}

/** The collection the hooks granted; a route that reaches this without one is a wiring bug, refused. */
export function grantedCollection(req: FastifyRequest): string {
  if (req.grantedCollection === null) throw new SourceboundError('SB_ERR_INTERNAL');
  return req.grantedCollection;
}

export interface AccessDeps {
  auth: Authenticator;
  limiter: RateLimiter;
  /** Ready for everything; or, given a collection, ready to answer in it (start-up loads them one by one). */
  isReady(collection?: string): boolean;
  defaultCollection: string;
  logger: Logger;
  metrics?: Metrics;
}

/** Adds the access hooks to `app`; call before any route is registered. */
export function installAccessControl(app: FastifyInstance, deps: AccessDeps): void {
  const { auth, limiter, metrics } = deps;
  const table: RouteRecord[] = [];
  tables.set(app, table);
  const warnedLegacy = new Set<string>();

  app.decorateRequest('principal', null as unknown as Principal);
  app.decorateRequest('grantedCollection', null);

  app.addHook('onRoute', (opts) => {
    const access = opts.config?.access;
    if (opts.config?.methodNotAllowed) return;
    for (const method of Array.isArray(opts.method) ? opts.method : [opts.method]) {
      table.push({ method: String(method), url: opts.url ?? opts.path, access });
    }
    if (!access) deps.logger.error({ route: `${String(opts.method)} ${opts.url}` }, 'route declares no access rule: every request to it is refused');
  });

  const spend = (bucket: string, reply: FastifyReply): void => {
    const d = limiter.take(bucket);
    if (d.allowed) return;
    metrics?.rejected.inc({ reason: 'rate_limited' });
    const seconds = Math.ceil(d.retryAfterMs / 1000);
    void reply.header('retry-after', String(seconds));
    throw new SourceboundError('SB_ERR_RATE_LIMITED', [seconds]);
  };

  // After routing, before the body is read: who is calling, within their budget, with the scope the
  // route asks for, and for a collection named in the path, one of theirs.
  app.addHook('onRequest', async (req, reply) => {
    req.principal = NOBODY;
    req.grantedCollection = null;
    // No route matched: nothing to protect, and the not-found reply is the same for every caller.
    // Counted per address, so probing for routes costs budget too.
    if (req.is404) return spend(addressBucket(req.ip), reply);
    const access = req.routeOptions.config.access;
    if (!access) {
      req.log.error({ route: req.routeOptions.url }, 'refused: the route declares no access rule');
      throw new SourceboundError('SB_ERR_FORBIDDEN', ['use this route']);
    }
    if (access.kind === 'public') return;
    if (access.kind === 'signed-link') return spend(addressBucket(req.ip), reply);

    const who = auth.identify(req.headers.authorization);
    // Counted before the result is known: a wrong or missing key spends its address's budget.
    spend(who.kind === 'key' ? `key:${who.principal.keyId}` : addressBucket(req.ip), reply);
    if (who.kind === 'wrong' || (who.kind === 'none' && auth.enforced)) throw new SourceboundError('SB_ERR_UNAUTHORIZED');
    if (who.kind === 'key') {
      req.principal = who.principal;
      // Log lines of this request name the key, never the key itself.
      req.log = req.log.child({ keyId: who.principal.keyId });
      if (who.legacyFormat && !warnedLegacy.has(who.principal.keyId!)) {
        warnedLegacy.add(who.principal.keyId!);
        req.log.warn('this API key has the old prefix; it still works, but make a new one with `sourcebound key new`');
      }
    } else {
      // Auth is off (loopback only, not required): the caller holds every right.
      req.principal = ANONYMOUS;
    }
    const p = req.principal;
    if (!access.scopes.some((s) => p.scopes.has(s))) throw new SourceboundError('SB_ERR_FORBIDDEN', [access.action]);
    // While the service starts, a request about one collection waits only for that collection (its
    // collection is checked below, or once the body is parsed); anything else waits for all of them.
    if (!access.whileLoading && !deps.isReady() && access.collection.in !== 'path' && access.collection.in !== 'body') {
      throw new SourceboundError('SB_ERR_NOT_READY');
    }
    if (access.collection.in === 'path') {
      req.grantedCollection = checkCollection(p, (req.params as { collection?: unknown } | undefined)?.collection);
      if (!access.whileLoading && !deps.isReady(req.grantedCollection)) throw new SourceboundError('SB_ERR_NOT_READY');
    }
  });

  // Once the body is parsed, before the handler: a collection named in the body must be one of the key's.
  app.addHook('preHandler', async (req) => {
    const access = req.routeOptions.config.access;
    if (access?.kind !== 'key' || access.collection.in !== 'body') return;
    const body = req.body;
    const named = body !== null && typeof body === 'object' && !Array.isArray(body) ? (body as { collection?: unknown }).collection : undefined;
    req.grantedCollection =
      named !== undefined ? checkCollection(req.principal, named) : access.collection.absent === 'default' ? checkCollection(req.principal, deps.defaultCollection) : null;
    if (!access.whileLoading && !deps.isReady(req.grantedCollection ?? undefined)) throw new SourceboundError('SB_ERR_NOT_READY');
  });
}

function checkCollection(p: Principal, value: unknown): string {
  if (typeof value !== 'string' || !COLLECTION_NAME.test(value)) {
    const message = COLLECTION_NAME_RULE;
    throw new SourceboundError('SB_ERR_VALIDATION', [`collection: ${message}`], { issues: [{ path: ['collection'], code: 'invalid_format', message }] });
  }
  requireCollection(p, value);
  return value;
}
