// The OpenAPI 3.1 description of this service, built from what the router holds: each route it
// recorded (src/api/access.ts), its access rule as declared, and the zod schemas the routes validate
// with (schemas.ts) and reply with (replies.ts), as JSON Schema 2020-12, the dialect of OpenAPI 3.1.

import { readFileSync } from 'node:fs';
import path from 'node:path';
import type { FastifyInstance } from 'fastify';
import { z } from 'zod';
import { PACKAGE_ROOT, type Config } from '../config/index.js';
import { keyAccess, routeTable, type RouteRecord } from './access.js';
import { describedRoutes, type Operation } from './openapi-routes.js';
import { errorReply } from './replies.js';

export const OPENAPI_PATH = '/v1/openapi.json';

// Any key may read it, whatever its scope; a caller with no key may not. The document holds no data, but
// it names the admin routes and the configured limits, which only a caller of the API has a use for, and
// every such caller holds a key: the open surface stays the health probes, the desk page and signed links.
// It is served while the index loads, since it does not depend on it.
export const OPENAPI_ACCESS = keyAccess(['query', 'ingest', 'admin'], 'read the API description', { in: 'own' }, { whileLoading: true });

/** Adds GET /v1/openapi.json to `r`, describing the routes of `app` (the root that holds the route table). */
export function registerOpenApiRoute(r: FastifyInstance, app: FastifyInstance, config: Readonly<Config>): void {
  let body: string | null = null;
  r.get(OPENAPI_PATH, { config: { access: OPENAPI_ACCESS } }, async (_req, reply) => {
    // Built on first use, when the router holds every route.
    body ??= JSON.stringify(openApiDocument(routeTable(app), config));
    return reply.header('content-type', 'application/json; charset=utf-8').send(body);
  });
}

/** "/v1/jobs/:jobId" → "/v1/jobs/{jobId}" */
export function openApiPath(url: string): string {
  return url.replace(/:([A-Za-z0-9_]+)/g, '{$1}');
}

let version: string | undefined;
function packageVersion(): string {
  version ??= (JSON.parse(readFileSync(path.join(PACKAGE_ROOT, 'package.json'), 'utf8')) as { version: string }).version;
  return version;
}

/** A zod schema as an OpenAPI 3.1 Schema Object (what a client sends and may be sent: the input side). */
function jsonSchema(schema: z.ZodType): Record<string, unknown> {
  const { $schema: _dialect, ...rest } = z.toJSONSchema(schema, { target: 'draft-2020-12', io: 'input', unrepresentable: 'any' });
  return rest;
}

const error = { $ref: '#/components/schemas/Error' };
const errorResponse = (description: string) => ({ description, content: { 'application/json': { schema: error } } });

/** Every route the router recorded, as an OpenAPI 3.1 document. */
export function openApiDocument(routes: readonly RouteRecord[], config: Readonly<Config>): Record<string, unknown> {
  const described = describedRoutes(config.limits);
  const paths: Record<string, Record<string, unknown>> = {};
  for (const route of routes) {
    const op = described[`${route.method} ${route.url}`] ?? (route.method === 'HEAD' ? headOf(described[`GET ${route.url}`]) : undefined);
    (paths[openApiPath(route.url)] ??= {})[route.method.toLowerCase()] = operationObject(route, op);
  }
  return {
    openapi: '3.1.0',
    info: {
      title: 'sourcebound',
      version: packageVersion(),
      description: 'Answers questions from your own documents and cites where each answer comes from. Errors: docs/errors.md.',
    },
    jsonSchemaDialect: 'https://json-schema.org/draft/2020-12/schema',
    components: {
      securitySchemes: { apiKey: { type: 'http', scheme: 'bearer', description: 'an API key made with `sourcebound key new`' } },
      schemas: { Error: jsonSchema(errorReply) },
    },
    paths,
  };
}

function headOf(get: Operation | undefined): Operation | undefined {
  if (!get) return undefined;
  return { summary: `the headers of GET: ${get.summary}`, replies: Object.fromEntries(Object.entries(get.replies).map(([s, r]) => [s, { description: r.description }])) };
}

function operationObject(route: RouteRecord, op: Operation | undefined): Record<string, unknown> {
  const access = route.access;
  const parameters: Record<string, unknown>[] = [...route.url.matchAll(/:([A-Za-z0-9_]+)/g)].map((m) => ({
    name: m[1],
    in: 'path',
    required: true,
    schema: op?.params?.[m[1]!] ? jsonSchema(op.params[m[1]!]!) : { type: 'string' },
  }));
  if (op?.query) {
    for (const [name, schema] of Object.entries(op.query.shape)) {
      parameters.push({ name, in: 'query', required: !(schema as z.ZodType).safeParse(undefined).success, schema: jsonSchema(schema as z.ZodType) });
    }
  }
  const responses: Record<string, unknown> = {};
  for (const [status, r] of Object.entries(op?.replies ?? { 200: { description: 'done' } })) {
    responses[status] = { description: r.description, ...(r.schema ? { content: { [r.type ?? 'application/json']: { schema: jsonSchema(r.schema) } } } : {}) };
    if (r.type && !r.schema) (responses[status] as Record<string, unknown>).content = { [r.type]: {} };
  }
  if (op?.body) responses['400'] = errorResponse('the body is not valid (SB_ERR_VALIDATION, SB_ERR_MALFORMED_JSON)');
  if (access?.kind === 'key') {
    responses['401'] = errorResponse('no key, or a key the service does not know (SB_ERR_UNAUTHORIZED)');
    responses['403'] = errorResponse(`the key may not ${access.action} (SB_ERR_FORBIDDEN)`);
    responses['429'] = errorResponse('too many requests for this key (SB_ERR_RATE_LIMITED)');
  }
  responses.default = errorResponse('any other refusal or failure, with its code');
  const who =
    access?.kind === 'key'
      ? `An API key with the scope ${access.scopes.join(' or ')}.`
      : access?.kind === 'signed-link'
        ? 'No key: the signed link in the query string is the credential.'
        : 'Open to anyone.';
  const body = op?.body
    ? {
        required: true,
        content: {
          'application/json': { schema: jsonSchema(op.body) },
          ...(op.multipart ? { 'multipart/form-data': { schema: { type: 'object', properties: { file: { type: 'string', contentMediaType: 'application/octet-stream' } }, required: ['file'] } } } : {}),
        },
      }
    : undefined;
  return {
    summary: op?.summary ?? `${route.method} ${route.url}`,
    description: [op?.description, who].filter(Boolean).join('\n\n'),
    security: access?.kind === 'key' ? [{ apiKey: [] }] : [],
    ...(parameters.length > 0 ? { parameters } : {}),
    ...(body ? { requestBody: body } : {}),
    responses,
  };
}
