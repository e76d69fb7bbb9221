// Client for an endpoint speaking the common chat-completions HTTP protocol
// (POST {base}/chat/completions → choices[0].message.content, or with `stream: true` a
// server-sent event stream of choices[0].delta.content pieces ending in `data: [DONE]`).
// Retries with jittered backoff, and a circuit breaker around the whole call.

import { createCircuitBreaker, type CircuitBreakerOptions } from './breaker.js';
import { readEventStream } from './sse.js';
import type { ChatMessage, CompletionClient } from './types.js';

export type CompletionFailure =
  | 'timeout'
  | 'network'
  | 'malformed'
  | 'aborted'
  | 'stream_cut'
  | 'circuit_open'
  | `http_${number}`;

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
  /** Circuit breaker settings; `false` turns it off. The clock defaults to Date.now. */
  breaker?: CircuitBreakerOptions | false;
}

const defaultSleep = (ms: number): Promise<void> => new Promise((resolve) => setTimeout(resolve, ms));

export function createCompletionClient(opts: CompletionClientOptions): CompletionClient {
  const doFetch = opts.fetch ?? fetch;
  const sleep = opts.sleep ?? defaultSleep;
  const random = opts.random ?? Math.random;
  const base = opts.baseBackoffMs ?? 500;
  const cap = opts.maxBackoffMs ?? 30_000;
  const breaker = opts.breaker === false ? null : createCircuitBreaker(opts.breaker ?? {});
  const url = `${opts.baseUrl.replace(/\/+$/, '')}/chat/completions`;
  const headers: Record<string, string> = { 'content-type': 'application/json' };
  if (opts.apiKey) headers.authorization = `Bearer ${opts.apiKey}`;

  const bodyFor = (messages: ChatMessage[], stream: boolean): string =>
    JSON.stringify({ model: opts.model, messages, temperature: opts.temperature, max_tokens: opts.maxTokens, stream });

  /**
   * One HTTP exchange. The timer is an idle timer: it is re-armed whenever stream data
   * arrives, so a long answer that keeps flowing is not cut, but a stall is.
   */
  async function attempt(
    body: string,
    outer: AbortSignal | undefined,
    n: number,
    onDelta: ((t: string) => void) | null,
    progress: { emitted: boolean },
  ): Promise<string> {
    const idle = new AbortController();
    let timer = setTimeout(() => idle.abort(), opts.timeoutMs);
    const touch = (): void => {
      clearTimeout(timer);
      timer = setTimeout(() => idle.abort(), opts.timeoutMs);
    };
    const signal = outer ? AbortSignal.any([outer, idle.signal]) : idle.signal;
    const fail = (err: unknown): CompletionError => {
      if (err instanceof CompletionError) return err;
      if (outer?.aborted) return new CompletionError('aborted', 'The request was cancelled', n, { cause: err });
      if (idle.signal.aborted) {
        return progress.emitted
          ? new CompletionError('stream_cut', `The stream stalled for ${opts.timeoutMs} ms`, n, { cause: err })
          : new CompletionError('timeout', `No reply within ${opts.timeoutMs} ms`, n, { cause: err });
      }
      if (progress.emitted) return new CompletionError('stream_cut', `The stream broke off: ${describe(err)}`, n, { cause: err });
      return new CompletionError('network', `Could not reach the completion endpoint: ${describe(err)}`, n, { cause: err });
    };
    try {
      const accept = onDelta ? 'text/event-stream' : 'application/json';
      const res = await doFetch(url, { method: 'POST', headers: { ...headers, accept }, body, signal });
      if (!res.ok) {
        await res.body?.cancel().catch(() => undefined);
        throw new CompletionError(`http_${res.status}`, `Completion endpoint replied ${res.status}`, n, {
          retryAfterMs: parseRetryAfter(res.headers.get('retry-after')),
        });
      }
      const type = res.headers.get('content-type') ?? '';
      if (!onDelta || !type.includes('text/event-stream') || !res.body) {
        // A server may ignore `stream: true` and answer in one piece; pass it on as one delta.
        const content = extractContent(await res.text(), n);
        if (onDelta) {
          progress.emitted = true;
          onDelta(content);
        }
        return content;
      }
      return await readStream(res.body, n, onDelta, touch, progress);
    } catch (err) {
      throw fail(err);
    } finally {
      clearTimeout(timer);
    }
  }

  async function withRetries(
    body: string,
    signal: AbortSignal | undefined,
    onDelta: ((t: string) => void) | null,
  ): Promise<string> {
    const maxAttempts = Math.max(1, Math.floor(opts.retries) + 1);
    const progress = { emitted: false };
    for (let n = 1; ; n++) {
      try {
        return await attempt(body, signal, n, onDelta, progress);
      } catch (err) {
        // Once text has reached the caller a retry would repeat it, so a broken stream is final.
        if (!(err instanceof CompletionError) || !retryable(err.reason) || n >= maxAttempts || progress.emitted) throw err;
        // Full jitter (uniform in [0, ceiling]) spreads retries from many clients apart;
        // a server's Retry-After overrides it, within our own cap.
        const ceiling = Math.min(cap, base * 2 ** (n - 1));
        const hinted = err.retryAfterMs;
        const delay = hinted !== undefined ? Math.min(cap, hinted) : Math.floor(random() * ceiling);
        await sleep(delay);
        if (signal?.aborted) throw new CompletionError('aborted', 'The request was cancelled', n);
      }
    }
  }

  async function guarded(
    messages: ChatMessage[],
    signal: AbortSignal | undefined,
    onDelta: ((t: string) => void) | null,
  ): Promise<string> {
    if (breaker && !breaker.tryAcquire()) {
      throw new CompletionError('circuit_open', 'The completion endpoint failed repeatedly; skipping it for a while', 0);
    }
    try {
      const out = await withRetries(bodyFor(messages, onDelta !== null), signal, onDelta);
      breaker?.success();
      return out;
    } catch (err) {
      // A caller hanging up says nothing about the endpoint's health.
      if (!(err instanceof CompletionError && err.reason === 'aborted')) breaker?.failure();
      else breaker?.success();
      throw err;
    }
  }

  return {
    complete: (messages, signal) => guarded(messages, signal, null),
    stream: (messages, onDelta, signal) => guarded(messages, signal, onDelta),
  };
}

/** Reads `data:` events until `[DONE]`; a stream that ends without it was cut. */
async function readStream(
  body: ReadableStream<Uint8Array>,
  n: number,
  onDelta: (t: string) => void,
  touch: () => void,
  progress: { emitted: boolean },
): Promise<string> {
  let text = '';
  let finished = false;
  for await (const data of readEventStream(body, touch)) {
    if (data.trim() === '[DONE]') {
      finished = true;
      break;
    }
    let json: unknown;
    try {
      json = JSON.parse(data);
    } catch (err) {
      throw new CompletionError('malformed', 'A stream event is not JSON', n, { cause: err });
    }
    const choice = (json as { choices?: { delta?: { content?: unknown }; finish_reason?: unknown }[] })?.choices?.[0];
    if (!choice) {
      // Usage-only and keep-alive events carry no choice; anything else is not this protocol.
      if (json && typeof json === 'object' && ('usage' in json || 'id' in json)) continue;
      throw new CompletionError('malformed', 'A stream event has no choices', n);
    }
    const piece = choice.delta?.content;
    if (typeof piece === 'string' && piece.length > 0) {
      text += piece;
      progress.emitted = true;
      onDelta(piece);
    }
    if (typeof choice.finish_reason === 'string') finished = true;
  }
  if (!finished) throw new CompletionError('stream_cut', 'The stream ended before it was complete', n);
  return text;
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
