// Client for an endpoint speaking the common chat-completions HTTP protocol
// (POST {base}/chat/completions → choices[0].message.content). Non-streaming: the answer is
// checked for grounding before anyone sees it, so there is nothing to gain from streaming here.

import type { ChatMessage, CompletionClient } from './types.js';

export type CompletionFailure = 'timeout' | 'network' | 'malformed' | 'aborted' | `http_${number}`;

export class CompletionError extends Error {
  readonly reason: CompletionFailure;
  /** Attempts made before giving up (1 = no retry). */
  readonly attempts: number;
  /** The server's Retry-After, in ms, when it sent one. */
  readonly retryAfterMs: number | undefined;

  constructor(
    reason: CompletionFailure,
    message: string,
    attempts: number,
    options?: { cause?: unknown; retryAfterMs?: number | undefined },
  ) {
    super(message, options?.cause === undefined ? undefined : { cause: options.cause });
    this.name = 'CompletionError';
    this.reason = reason;
    this.attempts = attempts;
    this.retryAfterMs = options?.retryAfterMs;
  }
}

export interface CompletionClientOptions {
  baseUrl: string;
  model: string;
  apiKey?: string;
  temperature: number;
  maxTokens: number;
  /** Per attempt, covering the request and reading the body. */
  timeoutMs: number;
  /** Extra attempts after the first, on 429, 5xx, timeouts and network errors. */
  retries: number;
  fetch?: typeof fetch;
  sleep?: (ms: number) => Promise<void>;
  random?: () => number;
  /** First backoff ceiling (default 500 ms); doubles per retry up to maxBackoffMs. */
  baseBackoffMs?: number;
  /** Largest wait between attempts, including a server's Retry-After (default 30 s). */
  maxBackoffMs?: number;
}

const defaultSleep = (ms: number): Promise<void> => new Promise((resolve) => setTimeout(resolve, ms));

export function createCompletionClient(opts: CompletionClientOptions): CompletionClient {
  const doFetch = opts.fetch ?? fetch;
  const sleep = opts.sleep ?? defaultSleep;
  const random = opts.random ?? Math.random;
  const base = opts.baseBackoffMs ?? 500;
  const cap = opts.maxBackoffMs ?? 30_000;
  const url = `${opts.baseUrl.replace(/\/+$/, '')}/chat/completions`;
  const headers: Record<string, string> = { 'content-type': 'application/json', accept: 'application/json' };
  if (opts.apiKey) headers.authorization = `Bearer ${opts.apiKey}`;

  async function attempt(body: string, outer: AbortSignal | undefined, n: number): Promise<string> {
    const timer = AbortSignal.timeout(opts.timeoutMs);
    const signal = outer ? AbortSignal.any([outer, timer]) : timer;
    let res: Response;
    let text: string;
    try {
      res = await doFetch(url, { method: 'POST', headers, body, signal });
      text = await res.text();
    } catch (err) {
      if (outer?.aborted) throw new CompletionError('aborted', 'The request was cancelled', n, { cause: err });
      if (timer.aborted) {
        throw new CompletionError('timeout', `No reply within ${opts.timeoutMs} ms`, n, { cause: err });
      }
      throw new CompletionError('network', `Could not reach the completion endpoint: ${describe(err)}`, n, {
        cause: err,
      });
    }
    if (!res.ok) {
      throw new CompletionError(`http_${res.status}`, `Completion endpoint replied ${res.status}`, n, {
        retryAfterMs: parseRetryAfter(res.headers.get('retry-after')),
      });
    }
    return extractContent(text, n);
  }

  return {
    async complete(messages: ChatMessage[], signal?: AbortSignal): Promise<string> {
      const body = JSON.stringify({
        model: opts.model,
        messages,
        temperature: opts.temperature,
        max_tokens: opts.maxTokens,
        stream: false,
      });
      const maxAttempts = Math.max(1, Math.floor(opts.retries) + 1);
      for (let n = 1; ; n++) {
        try {
          return await attempt(body, signal, n);
        } catch (err) {
          if (!(err instanceof CompletionError) || !retryable(err.reason) || n >= maxAttempts) throw err;
          // Full jitter (uniform in [0, ceiling]) spreads retries from many clients apart;
          // a server's Retry-After overrides it, within our own cap.
          const ceiling = Math.min(cap, base * 2 ** (n - 1));
          const hinted = err.retryAfterMs;
          const delay = hinted !== undefined ? Math.min(cap, hinted) : Math.floor(random() * ceiling);
          await sleep(delay);
          if (signal?.aborted) throw new CompletionError('aborted', 'The request was cancelled', n);
        }
      }
    },
  };
}

function retryable(reason: CompletionFailure): boolean {
  if (reason === 'timeout' || reason === 'network') return true;
  if (reason.startsWith('http_')) {
    const status = Number(reason.slice(5));
    return status === 429 || status >= 500;
  }
  return false;
}

/** Retry-After in delta-seconds form (RFC 9110 §10.2.3); the HTTP-date form is ignored. */
export function parseRetryAfter(value: string | null): number | undefined {
  if (value === null) return undefined;
  const trimmed = value.trim();
  if (!/^\d+(?:\.\d+)?$/.test(trimmed)) return undefined;
  return Math.round(Number(trimmed) * 1000);
}

function extractContent(text: string, attempts: number): string {
  let json: unknown;
  try {
    json = JSON.parse(text);
  } catch (err) {
    throw new CompletionError('malformed', 'The completion endpoint did not return JSON', attempts, { cause: err });
  }
  const content = (json as { choices?: { message?: { content?: unknown } }[] })?.choices?.[0]?.message?.content;
  if (typeof content === 'string') return content;
  // Some servers send content as an array of typed parts; keep the text parts.
  if (Array.isArray(content)) {
    const parts = content
      .map((p: unknown) => (p && typeof p === 'object' && typeof (p as { text?: unknown }).text === 'string' ? (p as { text: string }).text : ''))
      .join('');
    if (parts.length > 0) return parts;
  }
  throw new CompletionError('malformed', 'The reply has no choices[0].message.content text', attempts);
}

function describe(err: unknown): string {
  if (err instanceof Error) {
    const cause = (err as Error & { cause?: unknown }).cause;
    return cause instanceof Error ? `${err.message} (${cause.message})` : err.message;
  }
  return String(err);
}
