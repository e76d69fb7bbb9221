// One table of coded errors. Codes are never reused or renamed: clients match on them.
// docs/errors.md lists each code with its meaning and fix; tests/errors.test.ts pins this table.

export const ERRORS = {
  SB_ERR_VALIDATION: { status: 400, message: 'The request is not valid: %s' },
  SB_ERR_BODY_TOO_LARGE: { status: 413, message: 'The request body is larger than the limit of %s bytes' },
  SB_ERR_UNSUPPORTED_MEDIA_TYPE: { status: 415, message: 'Send the request body as application/json' },
  SB_ERR_MALFORMED_JSON: { status: 400, message: 'The request body is not valid JSON: %s' },
  SB_ERR_NOT_FOUND: { status: 404, message: 'No route %s %s' },
  SB_ERR_METHOD_NOT_ALLOWED: { status: 405, message: 'Method %s is not allowed here' },
  SB_ERR_UNKNOWN_COLLECTION: { status: 404, message: 'No collection named "%s"' },
  SB_ERR_NOT_READY: { status: 503, message: 'The index is still loading; try again shortly' },
  SB_ERR_EMBEDDER_MISMATCH: {
    status: 409,
    message:
      'Collection "%s" was indexed with embedder "%s" but the service runs "%s"; re-index with `sourcebound reindex --full`',
  },
  SB_ERR_INGEST_UNSUPPORTED_TYPE: { status: 415, message: 'Unsupported document type: %s' },
  SB_ERR_INGEST_FAILED: { status: 422, message: 'Could not ingest %s: %s' },
  SB_ERR_CONFIG_INVALID: { status: 500, message: 'Invalid configuration:\n%s' },
  SB_ERR_MODEL_MISSING: { status: 500, message: '%s' },
  SB_ERR_INTERNAL: { status: 500, message: 'Internal error' },
  SB_ERR_UNAUTHORIZED: { status: 401, message: 'A valid API key is required: send "Authorization: Bearer <key>"' },
  SB_ERR_FORBIDDEN: { status: 403, message: 'This API key may not %s' },
  SB_ERR_BUSY: { status: 503, message: 'The service is busy (%s); retry shortly' },
  SB_ERR_RATE_LIMITED: { status: 429, message: 'Too many requests for this key; retry in %s seconds' },
  SB_ERR_DEADLINE: { status: 503, message: 'The request did not finish within %s ms' },
  SB_ERR_AUTH_CONFIG: { status: 500, message: '%s' },
  SB_ERR_REINDEX_RUNNING: { status: 409, message: 'A re-index is already running (process %s, since %s); try again when it has finished' },
  SB_ERR_UNKNOWN_DOCUMENT: { status: 404, message: 'No document "%s" in this collection' },
  SB_ERR_UNKNOWN_JOB: { status: 404, message: 'No job "%s"' },
  SB_ERR_BAD_FILE_NAME: { status: 400, message: 'Unusable file name: %s' },
  SB_ERR_UPLOAD_TOO_LARGE: { status: 413, message: 'The upload is larger than the limit of %s bytes' },
  SB_ERR_ORIGINAL_UNAVAILABLE: { status: 404, message: 'The original file of document "%s" is not available: %s' },
  SB_ERR_ORIGINAL_CHANGED: {
    status: 409,
    message: 'The original file of document "%s" has changed since it was indexed; re-index the collection to read it',
  },
  SB_ERR_LINK_INVALID: { status: 403, message: 'This file link is invalid or has expired; open the file again from the desk' },
  SB_ERR_UNKNOWN_FAILED_UPLOAD: { status: 404, message: 'No failed upload "%s" in this collection' },
  SB_ERR_DATABASE_UNUSABLE: { status: 503, message: 'The PostgreSQL database cannot be used: %s' },
} as const;

export type ErrorCode = keyof typeof ERRORS;

export class SourceboundError extends Error {
  readonly code: ErrorCode;
  readonly status: number;
  readonly details: unknown;

  constructor(code: ErrorCode, args: readonly (string | number)[] = [], details?: unknown) {
    super(format(ERRORS[code].message, args));
    this.name = 'SourceboundError';
    this.code = code;
    this.status = ERRORS[code].status;
    this.details = details;
  }

  /** fastify and its plugins read `statusCode`. */
  get statusCode(): number {
    return this.status;
  }
}

export function sbError(code: ErrorCode, ...args: (string | number)[]): SourceboundError {
  return new SourceboundError(code, args);
}

function format(template: string, args: readonly (string | number)[]): string {
  let i = 0;
  return template.replace(/%s/g, () => {
    const v = args[i++];
    return v === undefined ? '' : String(v);
  });
}
