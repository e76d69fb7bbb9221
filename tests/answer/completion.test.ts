import { afterEach, describe, expect, it } from 'vitest';
import { CompletionError, createCompletionClient, parseRetryAfter, type CompletionClientOptions } from '../../src/answer/completion.js';
import type { ChatMessage } from '../../src/answer/types.js';
import { waitFor } from '../fixtures/wait.js';
import { NEVER, okReply, startStub, streamReply, type StubReply, type StubServer } from './stub-server.js';

const messages: ChatMessage[] = [
  { role: 'system', content: 'Answer from the sources.' },
  { role: 'user', content: 'How long do I have to claim?' },
];

let stub: StubServer | null = null;
afterEach(async () => {
  await stub?.close();
  stub = null;
});

async function setup(replies: StubReply[], over: Partial<CompletionClientOptions> = {}) {
  stub = await startStub(replies);
  const delays: number[] = [];
  const client = createCompletionClient({
    baseUrl: stub.baseUrl,
    model: 'mvt-test-model',
    temperature: 0,
    maxTokens: 300,
    timeoutMs: 2000,
    retries: 2,
    sleep: async (ms) => {
      delays.push(ms);
    },
    random: () => 0.5,
    ...over,
  });
  return { client, delays, stub };
}

async function failure(p: Promise<unknown>): Promise<CompletionError> {
  const err = await p.then(
    () => null,
    (e: unknown) => e,
  );
  expect(err).toBeInstanceOf(CompletionError);
  return err as CompletionError;
}

/**
 * Starts a call and cancels it once the endpoint has received it (its `n`th request), so the cancel always
 * lands on a request in flight; returns the call's error. A call that ends before reaching the endpoint
 * stops the wait and returns its own error for the test to check.
 */
async function cancelInFlight(client: ReturnType<typeof createCompletionClient>, stub: StubServer, n: number): Promise<CompletionError> {
  const ctl = new AbortController();
  let ended = false;
  const call = client.complete(messages, ctl.signal).finally(() => (ended = true));
  await waitFor(() => stub.seen.length >= n || ended, { what: `request ${n} to reach the completion endpoint`, timeoutMs: 10_000 });
  ctl.abort();
  return failure(call);
}

describe('createCompletionClient', () => {
  it('posts the chat-completions request and returns choices[0].message.content', async () => {
    const { client, stub } = await setup([okReply('Claims take 28 days [1].')], { apiKey: 'sk-test' });
    await expect(client.complete(messages)).resolves.toBe('Claims take 28 days [1].');
    expect(stub.seen).toHaveLength(1);
    const req = stub.seen[0]!;
    expect(req.method).toBe('POST');
    expect(req.url).toBe('/v1/chat/completions');
    expect(req.headers.authorization).toBe('Bearer sk-test');
    expect(req.body).toEqual({ model: 'mvt-test-model', messages, temperature: 0, max_tokens: 300, stream: false });
  });

  it('sends no authorization header without an api key', async () => {
    const { client, stub } = await setup([okReply('ok')]);
    await client.complete(messages);
    expect(stub.seen[0]?.headers.authorization).toBeUndefined();
  });

  it('retries after a 500 with full-jitter backoff and then succeeds', async () => {
    const { client, delays, stub } = await setup([{ status: 500, body: { error: 'busy' } }, okReply('second time')]);
    await expect(client.complete(messages)).resolves.toBe('second time');
    expect(stub.seen).toHaveLength(2);
    // random() = 0.5 of the first ceiling (500 ms).
    expect(delays).toEqual([250]);
  });

  it('waits for the Retry-After seconds a 429 asks for', async () => {
    const { client, delays, stub } = await setup([{ status: 429, headers: { 'retry-after': '3' } }, okReply('after wait')]);
    await expect(client.complete(messages)).resolves.toBe('after wait');
    expect(stub.seen).toHaveLength(2);
    expect(delays).toEqual([3000]);
  });

  it('caps a very long Retry-After at the largest backoff', async () => {
    const { client, delays } = await setup([{ status: 429, headers: { 'retry-after': '3600' } }, okReply('ok')], {
      maxBackoffMs: 10_000,
    });
    await client.complete(messages);
    expect(delays).toEqual([10_000]);
  });

  it('gives up after the configured retries with the last status as the reason', async () => {
    const { client, delays, stub } = await setup([{ status: 503 }]);
    const err = await failure(client.complete(messages));
    expect(err.reason).toBe('http_503');
    expect(err.attempts).toBe(3);
    expect(stub.seen).toHaveLength(3);
    // Ceilings 500 then 1000 ms, each halved by random() = 0.5.
    expect(delays).toEqual([250, 500]);
  });

  it('does not retry a 400', async () => {
    const { client, stub, delays } = await setup([{ status: 400, body: { error: 'bad' } }, okReply('never')]);
    const err = await failure(client.complete(messages));
    expect(err.reason).toBe('http_400');
    expect(stub.seen).toHaveLength(1);
    expect(delays).toEqual([]);
  });

  it('reports a timeout when the server is slower than the per-attempt limit', async () => {
    // An endpoint that never answers, so the per-attempt limit is what ends each attempt on any machine.
    const { client, stub } = await setup([{ replyWhen: NEVER, ...okReply('late') }], { timeoutMs: 100, retries: 1 });
    const err = await failure(client.complete(messages));
    expect(err.reason).toBe('timeout');
    expect(stub.seen).toHaveLength(2);
  });

  it('reports a body that is not JSON as malformed, without retrying', async () => {
    const { client, stub } = await setup([{ body: '<html>oops' }, okReply('never')]);
    const err = await failure(client.complete(messages));
    expect(err.reason).toBe('malformed');
    expect(stub.seen).toHaveLength(1);
  });

  it('reports JSON without message content as malformed', async () => {
    const { client } = await setup([{ body: { choices: [] } }]);
    expect((await failure(client.complete(messages))).reason).toBe('malformed');
  });

  it('reports an unreachable endpoint as a network error after retrying', async () => {
    const dead = await startStub([]);
    const baseUrl = dead.baseUrl;
    await dead.close();
    const delays: number[] = [];
    const client = createCompletionClient({
      baseUrl,
      model: 'm',
      temperature: 0,
      maxTokens: 10,
      timeoutMs: 2000,
      retries: 1,
      sleep: async (ms) => {
        delays.push(ms);
      },
      random: () => 0,
    });
    const err = await failure(client.complete(messages));
    expect(err.reason).toBe('network');
    expect(err.attempts).toBe(2);
    expect(delays).toEqual([0]);
  });

  it('stops at once when the caller cancels', async () => {
    const { client, stub } = await setup([{ replyWhen: NEVER, ...okReply('late') }]);
    const err = await cancelInFlight(client, stub, 1);
    expect(err.reason).toBe('aborted');
    // Cancelled, not retried.
    expect(stub.seen).toHaveLength(1);
  });
});

describe('parseRetryAfter', () => {
  it('reads delta-seconds and ignores other forms (RFC 9110 section 10.2.3)', () => {
    expect(parseRetryAfter('2')).toBe(2000);
    expect(parseRetryAfter(' 0 ')).toBe(0);
    expect(parseRetryAfter('Wed, 21 Oct 2026 07:28:00 GMT')).toBeUndefined();
    expect(parseRetryAfter(null)).toBeUndefined();
  });
});

describe('createCompletionClient streaming', () => {
  it('asks for a stream, passes each delta on as it arrives and returns the whole text', async () => {
    const { client, stub } = await setup([streamReply(['Claims take ', '28 days', ' [1].'])]);
    const pieces: string[] = [];
    await expect(client.stream?.(messages, (t) => pieces.push(t))).resolves.toBe('Claims take 28 days [1].');
    expect(pieces).toEqual(['Claims take ', '28 days', ' [1].']);
    expect((stub.seen[0]?.body as { stream: boolean }).stream).toBe(true);
    expect(stub.seen[0]?.headers.accept).toBe('text/event-stream');
  });

  it('treats a stream that ends without [DONE] or a finish reason as cut, and does not retry it', async () => {
    const cut = streamReply(['Claims take ', '28 days', ' [1].']);
    const { client, stub } = await setup([{ ...cut, cutAfter: 2 }, streamReply(['never'])]);
    const pieces: string[] = [];
    const err = await failure(client.stream?.(messages, (t) => pieces.push(t)) ?? Promise.resolve());
    expect(err.reason).toBe('stream_cut');
    expect(pieces).toEqual(['Claims take ', '28 days']);
    // Text already reached the caller: a retry would repeat it.
    expect(stub.seen).toHaveLength(1);
  });

  it('retries a 429 before the stream starts, honouring Retry-After', async () => {
    const { client, delays } = await setup([{ status: 429, headers: { 'retry-after': '1' } }, streamReply(['ok'])]);
    await expect(client.stream?.(messages, () => undefined)).resolves.toBe('ok');
    expect(delays).toEqual([1000]);
  });

  it('reports a stream event that is not JSON as malformed', async () => {
    const { client } = await setup([{ events: ['{"choices":[{"delta":{"content":"Cla"}}]}', '{not json', '[DONE]'] }]);
    expect((await failure(client.stream?.(messages, () => undefined) ?? Promise.resolve())).reason).toBe('malformed');
  });

  it('accepts a server that ignores stream: true and answers in one JSON piece', async () => {
    const { client } = await setup([okReply('Whole reply [1].')]);
    const pieces: string[] = [];
    await expect(client.stream?.(messages, (t) => pieces.push(t))).resolves.toBe('Whole reply [1].');
    expect(pieces).toEqual(['Whole reply [1].']);
  });

  it('cuts a stream that stalls longer than the timeout between events', async () => {
    // After the first event the stream goes quiet for good: only the stall timeout can end it.
    const { client } = await setup([streamReply(['a', 'b', 'c'], { pauseAfter: 1, resumeWhen: NEVER })], { timeoutMs: 150, retries: 0 });
    const pieces: string[] = [];
    expect((await failure(client.stream?.(messages, (t) => pieces.push(t)) ?? Promise.resolve())).reason).toBe('stream_cut');
    expect(pieces).toEqual(['a']);
  });
});

describe('createCompletionClient circuit breaker', () => {
  it('skips the endpoint after repeated failures, then lets one trial call through after the cool-down', async () => {
    let clock = 0;
    const { client, stub } = await setup([{ status: 500 }, { status: 500 }, okReply('back')], {
      retries: 0,
      breaker: { failureThreshold: 2, coolDownMs: 10_000, now: () => clock },
    });
    expect((await failure(client.complete(messages))).reason).toBe('http_500');
    expect((await failure(client.complete(messages))).reason).toBe('http_500');
    const open = await failure(client.complete(messages));
    expect(open.reason).toBe('circuit_open');
    expect(stub.seen).toHaveLength(2);
    clock = 10_000;
    await expect(client.complete(messages)).resolves.toBe('back');
    expect(stub.seen).toHaveLength(3);
  });

  it('does not count a caller cancelling as an endpoint failure', async () => {
    const { client, stub } = await setup([{ replyWhen: NEVER, ...okReply('late') }], { retries: 0, breaker: { failureThreshold: 1, coolDownMs: 10_000 } });
    expect((await cancelInFlight(client, stub, 1)).reason).toBe('aborted');
    // The circuit is still closed: the next call reaches the server (an open circuit would refuse it at once).
    expect((await cancelInFlight(client, stub, 2)).reason).toBe('aborted');
    expect(stub.seen).toHaveLength(2);
  });
});
