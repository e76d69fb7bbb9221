import { createHash, randomBytes, timingSafeEqual } from 'node:crypto';
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

/** Holds nothing: what a request carries until the access hook has decided who it is. */
export const NOBODY: Principal = {
  keyId: null,
  scopes: new Set<Scope>(),
  collections: new Set<string>(),
};

/**
 * The project's own key prefix, so neither people nor leaked-secret scanners mistake a key for another
 * platform's. Keys made before it began with a prefix used by another widely used platform; they still
 * work, because a key is recognised by the SHA-256 of the whole string, prefix included.
 */
export const KEY_PREFIX = 'sbk_';
const LEGACY_KEY_PREFIX = 'sb_';

/** A new API key: the prefix and 256 random bits in base64url (43 characters). */
export function newApiKey(): string {
  return `${KEY_PREFIX}${randomBytes(32).toString('base64url')}`;
}

/** True for a key in the format `key new` made before the project had a prefix of its own. */
export function isLegacyKey(key: string): boolean {
  return key.startsWith(LEGACY_KEY_PREFIX);
}

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

/** What an Authorization header amounts to, before anything is refused. */
export type Identity =
  | { kind: 'none' }
  | { kind: 'wrong' }
  | { kind: 'key'; principal: Principal; legacyFormat: boolean };

export interface Authenticator {
  readonly enforced: boolean;
  /** Who the header names; never throws, so the caller can count the request before it refuses it. */
  identify(header: string | undefined): Identity;
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
  const identify = (header: string | undefined): Identity => {
    const m = header ? /^Bearer\s+(\S+)\s*$/i.exec(header) : null;
    // No bearer key at all (another scheme included); with auth enforced that is refused like a wrong key.
    if (!m) return { kind: 'none' };
    const digest = createHash('sha256').update(m[1]!, 'utf8').digest();
    // Compare against every key in constant time and without an early exit, so timing reveals
    // neither which key matched nor how much of a digest did.
    let found: Principal | null = null;
    for (const k of keys) {
      if (timingSafeEqual(digest, k.digest)) found = k.principal;
    }
    return found ? { kind: 'key', principal: found, legacyFormat: isLegacyKey(m[1]!) } : { kind: 'wrong' };
  };
  return {
    enforced,
    identify,
    authenticate(header) {
      const who = identify(header);
      if (who.kind === 'key') return who.principal;
      if (who.kind === 'none' && !enforced) return ANONYMOUS;
      throw new SourceboundError('SB_ERR_UNAUTHORIZED');
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
