// Serves the reference desk page (built by `npm run build` into dist/web) at `/` and its assets
// under `/desk/`. Only files found in that folder at the first request are served, by exact name.

import { createHash } from 'node:crypto';
import { existsSync, readdirSync, readFileSync } from 'node:fs';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import type { FastifyInstance, FastifyReply, FastifyRequest } from 'fastify';
import { SourceboundError } from '../errors.js';
import { PUBLIC } from './access.js';

const TYPES: Record<string, string> = {
  '.html': 'text/html; charset=utf-8',
  '.js': 'text/javascript; charset=utf-8',
  '.css': 'text/css; charset=utf-8',
  '.svg': 'image/svg+xml',
  '.png': 'image/png',
};

/**
 * No inline script or style anywhere, no third-party origin; the page talks only to this service.
 * `blob:` frames/objects are not needed: originals open in a window of their own.
 */
export const DESK_CSP = [
  "default-src 'none'",
  "script-src 'self'",
  "style-src 'self'",
  "img-src 'self' data:",
  "connect-src 'self'",
  "base-uri 'none'",
  "form-action 'none'",
  "frame-ancestors 'none'",
].join('; ');

interface Asset {
  body: Buffer;
  type: string;
  etag: string;
}

/** dist/web next to the compiled code, or, when running the TypeScript directly, the built copy in dist/. */
export function defaultDeskDir(): string {
  const candidates = [fileURLToPath(new URL('../web/', import.meta.url)), fileURLToPath(new URL('../../dist/web/', import.meta.url))];
  return candidates.find((d) => existsSync(path.join(d, 'desk.js'))) ?? candidates[0]!;
}

function loadAssets(dir: string): Map<string, Asset> {
  const out = new Map<string, Asset>();
  if (!existsSync(dir)) return out;
  for (const name of readdirSync(dir)) {
    const type = TYPES[path.extname(name)];
    if (!type || !/^[a-z0-9][a-z0-9.-]*$/.test(name)) continue;
    const body = readFileSync(path.join(dir, name));
    out.set(name, { body, type, etag: `"${createHash('sha256').update(body).digest('hex').slice(0, 20)}"` });
  }
  return out;
}

export function registerDeskAssets(r: FastifyInstance, opts: { dir?: string } = {}): void {
  let assets: Map<string, Asset> | null = null;
  const get = (name: string): Asset | undefined => {
    if (!assets) {
      const found = loadAssets(opts.dir ?? defaultDeskDir());
      // Kept only once the page is there, so a server started before the build picks it up later.
      if (!found.has('index.html')) return undefined;
      assets = found;
    }
    return assets.get(name);
  };

  const send = (req: FastifyRequest, reply: FastifyReply, asset: Asset) => {
    void reply
      .header('content-type', asset.type)
      .header('etag', asset.etag)
      // Names are not content-hashed, so browsers revalidate every time; an unchanged file costs a 304.
      .header('cache-control', 'no-cache')
      .header('content-security-policy', DESK_CSP)
      .header('x-content-type-options', 'nosniff')
      .header('referrer-policy', 'no-referrer')
      .header('x-frame-options', 'DENY');
    if (req.headers['if-none-match'] === asset.etag) return reply.status(304).send();
    return reply.send(asset.body);
  };

  // The page and its assets hold no data: public, so a browser can load them before the key is typed.
  r.get('/', { config: { access: PUBLIC } }, async (req, reply) => {
    const page = get('index.html');
    if (!page) throw new SourceboundError('SB_ERR_NOT_FOUND', ['GET', '/ (the desk page is not built: run `npm run build`)']);
    return send(req, reply, page);
  });

  r.get('/desk/:file', { config: { access: PUBLIC } }, async (req, reply) => {
    const name = (req.params as { file: string }).file;
    const asset = name === 'index.html' ? undefined : get(name);
    if (!asset) throw new SourceboundError('SB_ERR_NOT_FOUND', ['GET', `/desk/${name}`]);
    return send(req, reply, asset);
  });
}
