import type { z } from 'zod';
import { SourceboundError } from '../errors.js';
import type { SearchMode } from '../types.js';

export function isSearchMode(m: string | undefined): m is SearchMode {
  return m === 'hybrid' || m === 'lexical' || m === 'dense';
}

/** Rejects with SB_ERR_DEADLINE when `work` takes longer than `ms`. */
export async function withDeadline<T>(work: Promise<T>, ms: number): Promise<T> {
  let timer: NodeJS.Timeout | undefined;
  const deadline = new Promise<never>((_, reject) => {
    timer = setTimeout(() => reject(new SourceboundError('SB_ERR_DEADLINE', [ms])), ms);
  });
  try {
    return await Promise.race([work, deadline]);
  } finally {
    clearTimeout(timer);
  }
}

/** Validates a JSON body with a zod schema; failures become SB_ERR_VALIDATION with structured issues. */
export function parse<T>(schema: z.ZodType<T>, body: unknown): T {
  if (body === undefined || body === null || typeof body !== 'object' || Array.isArray(body)) {
    throw new SourceboundError('SB_ERR_VALIDATION', ['the body must be a JSON object'], { issues: [] });
  }
  const r = schema.safeParse(body);
  if (!r.success) {
    const issues = r.error.issues.map((i) => ({ path: i.path.map(String), code: i.code, message: i.message }));
    const summary = issues.map((i) => (i.path.length ? `${i.path.join('.')}: ${i.message}` : i.message)).join('; ');
    throw new SourceboundError('SB_ERR_VALIDATION', [summary], { issues });
  }
  return r.data;
}
