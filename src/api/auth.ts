import { createHash, timingSafeEqual } from 'node:crypto';
import { isIP } from 'node:net';
import { SourceboundError } from '../errors.js';

export type Scope = 'query' | 'ingest' | 'admin';

export interface ApiKeyConfig {
  id: string;
  sha256: string;
  scopes: Scope[];
  collections: string[];
}

/** Who is calling: a key's identity and rights, or anonymous when auth is off. */
export interface Principal {
  keyId: string | null;
  scopes: ReadonlySet<Scope>;
  /** null = every collection. */
  collections: ReadonlySet<string> | null;
}

export const ANONYMOUS: Principal = {
  keyId: null,
  scopes: new Set<Scope>(['query', 'ingest', 'admin']),
  collections: null,
};

export function isLoopback(host: string): boolean {
  if (host === 'localhost') return true;
  if (isIP(host) === 4) return host.startsWith('127.');
  const h = host.replace(/^\[|\]$/g, '');
  return h === '::1' || h === '0:0:0:0:0:0:0:1';
}

/** Auth is enforced when configured, and always when the service is reachable from other hosts. */
export function authEnforced(cfg: { required: boolean }, host: string): boolean {
  return cfg.required || !isLoopback(host);
}

/** Refuses a configuration that would expose the documents without keys. */
export function checkAuthConfig(cfg: { required: boolean; keys: ApiKeyConfig[] }, host: string): void {
  if (authEnforced(cfg, host) && cfg.keys.length === 0) {
    const why = cfg.required ? 'auth.required is true' : `the service binds to ${host}, which is not a loopback address`;
    throw new SourceboundError('SB_ERR_AUTH_CONFIG', [
      `Refusing to start: ${why} but no API keys are configured. Create one with \`sourcebound key new\` and add it under auth.keys, or bind to 127.0.0.1.`,
    ]);
  }
  const ids = new Set<string>();
  for (const k of cfg.keys) {
    if (ids.has(k.id)) throw new SourceboundError('SB_ERR_AUTH_CONFIG', [`Two API keys share the id "${k.id}"`]);
    ids.add(k.id);
  }
}

export function sha256Hex(s: string): string {
  return createHash('sha256').update(s, 'utf8').digest('hex');
}

export interface Authenticator {
  readonly enforced: boolean;
  /** The principal for an Authorization header; throws 401 when enforced and the key is missing or wrong. */
  authenticate(header: string | undefined): Principal;
}

export function createAuthenticator(cfg: { required: boolean; keys: ApiKeyConfig[] }, host: string): Authenticator {
  const enforced = authEnforced(cfg, host);
  const keys = cfg.keys.map((k) => ({
    id: k.id,
    digest: Buffer.from(k.sha256, 'hex'),
    principal: {
      keyId: k.id,
      scopes: new Set(k.scopes),
      collections: k.collections.includes('*') ? null : new Set(k.collections),
    } satisfies Principal,
  }));
  return {
    enforced,
    authenticate(header) {
      const m = header ? /^Bearer\s+(\S+)\s*$/i.exec(header) : null;
      if (!m) {
        if (enforced) throw new SourceboundError('SB_ERR_UNAUTHORIZED');
        return ANONYMOUS;
      }
      const digest = createHash('sha256').update(m[1]!, 'utf8').digest();
      // Compare against every key in constant time and without an early exit, so timing reveals
      // neither which key matched nor how much of a digest did.
      let found: Principal | null = null;
      for (const k of keys) {
        if (timingSafeEqual(digest, k.digest)) found = k.principal;
      }
      if (!found) throw new SourceboundError('SB_ERR_UNAUTHORIZED');
      return found;
    },
  };
}

export function requireScope(p: Principal, scope: Scope, action: string): void {
  if (!p.scopes.has(scope)) throw new SourceboundError('SB_ERR_FORBIDDEN', [action]);
}

/**
 * A collection outside the key's list is reported as unknown, exactly like one that does not exist,
 * so a key cannot even learn which other collections there are.
 */
export function requireCollection(p: Principal, collection: string): void {
  if (p.collections !== null && !p.collections.has(collection)) {
    throw new SourceboundError('SB_ERR_UNKNOWN_COLLECTION', [collection]);
  }
}

export function mayUseCollection(p: Principal, collection: string): boolean {
  return p.collections === null || p.collections.has(collection);
}
