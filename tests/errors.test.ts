import { readFileSync } from 'node:fs';
import path from 'node:path';
import { describe, expect, it } from 'vitest';
import { ERRORS, SourceboundError } from '../src/errors.js';

// Codes are part of the API: clients match on them. This pins the table; changing a code or its
// status is a breaking change and must be deliberate.
describe('the error table', () => {
  it('holds exactly these codes with these statuses', () => {
    const pinned = Object.fromEntries(Object.entries(ERRORS).map(([k, v]) => [k, v.status]));
    expect(pinned).toEqual({
      SB_ERR_VALIDATION: 400,
      SB_ERR_BODY_TOO_LARGE: 413,
      SB_ERR_UNSUPPORTED_MEDIA_TYPE: 415,
      SB_ERR_MALFORMED_JSON: 400,
      SB_ERR_NOT_FOUND: 404,
      SB_ERR_METHOD_NOT_ALLOWED: 405,
      SB_ERR_UNKNOWN_COLLECTION: 404,
      SB_ERR_NOT_READY: 503,
      SB_ERR_EMBEDDER_MISMATCH: 409,
      SB_ERR_INGEST_UNSUPPORTED_TYPE: 415,
      SB_ERR_INGEST_FAILED: 422,
      SB_ERR_CONFIG_INVALID: 500,
      SB_ERR_MODEL_MISSING: 500,
      SB_ERR_INTERNAL: 500,
      SB_ERR_UNAUTHORIZED: 401,
      SB_ERR_FORBIDDEN: 403,
      SB_ERR_BUSY: 503,
      SB_ERR_RATE_LIMITED: 429,
      SB_ERR_DEADLINE: 503,
      SB_ERR_AUTH_CONFIG: 500,
      SB_ERR_REINDEX_RUNNING: 409,
      SB_ERR_UNKNOWN_DOCUMENT: 404,
      SB_ERR_UNKNOWN_JOB: 404,
      SB_ERR_BAD_FILE_NAME: 400,
      SB_ERR_UPLOAD_TOO_LARGE: 413,
      SB_ERR_ORIGINAL_UNAVAILABLE: 404,
      SB_ERR_ORIGINAL_CHANGED: 409,
      SB_ERR_LINK_INVALID: 403,
      SB_ERR_UNKNOWN_FAILED_UPLOAD: 404,
      SB_ERR_DATABASE_UNUSABLE: 503,
    });
  });

  it('is documented code by code in docs/errors.md', () => {
    const doc = readFileSync(path.resolve(import.meta.dirname, '..', 'docs', 'errors.md'), 'utf8');
    for (const code of Object.keys(ERRORS)) expect(doc, code).toContain(`\`${code}\``);
  });

  it('fills message templates with their arguments', () => {
    const e = new SourceboundError('SB_ERR_UNKNOWN_COLLECTION', ['handbooks']);
    expect(e.message).toBe('No collection named "handbooks"');
    expect(e.status).toBe(404);
  });
});
