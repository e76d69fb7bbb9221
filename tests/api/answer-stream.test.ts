// POST /v1/answer with stream: true — server-sent events `sources`, `delta`, `done` (and
// `error` once the stream has started). Event framing per the WHATWG HTML Living Standard,
// section "Server-sent events".
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import type { FastifyInstance } from 'fastify';
import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';
import { createAnswerer } from '../../src/answer/answerer.js';
import { createCompletionClient } from '../../src/answer/completion.js';
import type { AnswerEvent } from '../../src/answer/types.js';
import { buildApp, type AppDeps } from '../../src/api/app.js';
import { loadConfig, type Config } from '../../src/config/index.js';
import { SourceboundError } from '../../src/errors.js';
import { silentLogger } from '../../src/logger.js';
import { appDeps, type Runtime } from '../../src/runtime.js';
import { DOCS, conceptEmbedder, countWords, wholeDoc } from '../answer/fixtures.js';
import { gate, NEVER, startStub, streamReply, type StubReply, type StubServer } from '../answer/stub-server.js';
import { SEED_DIR, tempRuntime } from '../fixtures/runtime.js';
import { waitFor, withDeadline } from '../fixtures/wait.js';

interface Frame {
  event: string;
  data: any;
}

function parseFrames(body: string): Frame[] {
  return body
    .split('\n\n')
    .filter((block) => block.trim() && !block.startsWith(':'))
    .map((block) => {
      const lines = block.split('\n');
      const event = lines.find((l) => l.startsWith('event: '))?.slice(7) ?? 'message';
      const data = lines.filter((l) => l.startsWith('data: ')).map((l) => l.slice(6)).join('\n');
      return { event, data: JSON.parse(data) };
    });
}

/** The answer text a client shows after applying every delta, resets included. */
function shownText(frames: Frame[]): string {
  let shown = '';
  for (const f of frames) if (f.event === 'delta') shown = f.data.reset ? f.data.text : shown + f.data.text;
  return shown;
}

describe('POST /v1/answer with stream: true on the demo corpus (offline)', () => {
  let rt: Runtime;
  let app: FastifyInstance;
  let cleanup: () => void;
  beforeAll(async () => {
    const made = await tempRuntime();
    ({ rt, cleanup } = made);
    app = buildApp(made.config, appDeps(rt, () => true));
    await rt.ingestor.ingestPath(SEED_DIR, { collection: 'default' });
  });
  afterAll(async () => {
    await app.close();
    cleanup();
  });

  const post = (payload: unknown) =>
    app.inject({ method: 'POST', url: '/v1/answer', payload: JSON.stringify(payload), headers: { 'content-type': 'application/json' } });

  it('sends the numbered sources, then the answer in deltas, then done with the same result the JSON reply gives', async () => {
    const question = 'How long do I have to make a claim for a delay refund?';
    const res = await post({ question, stream: true });
    expect(res.statusCode).toBe(200);
    expect(res.headers['content-type']).toMatch(/^text\/event-stream/);
    expect(res.headers['x-request-id']).toBeTruthy();
    const frames = parseFrames(res.body);
    expect(frames.map((f) => f.event)).toEqual(['sources', ...frames.slice(1, -1).map(() => 'delta'), 'done']);
    expect(frames.length).toBeGreaterThanOrEqual(3);
    const sources = frames[0]?.data.sources;
    expect(sources.map((s: { n: number }) => s.n)).toEqual(sources.map((_: unknown, i: number) => i + 1));
    const done = frames.at(-1)?.data;
    expect(done.answer).toContain('28 days');
    expect(shownText(frames)).toBe(done.answer);

    const plain = (await post({ question })).json();
    const { timings: _a, ...streamed } = done;
    const { timings: _b, ...json } = plain;
    expect(streamed).toEqual(json);
    expect(Object.keys(done)).toEqual(expect.arrayContaining(['answer', 'abstained', 'mode', 'citations', 'claims', 'confidence', 'caution', 'context', 'question']));
    expect(done.context).toMatchObject({ budgetTokens: expect.any(Number), estimated: expect.any(Boolean) });
  });

  it('numbers every quoted passage once, even two from one document, and sends each with the delta that shows it', async () => {
    // The penalty-fare notice answers this with two sentences of one document.
    const frames = parseFrames((await post({ question: 'How much is the penalty fare?', stream: true })).body);
    const done = frames.at(-1)?.data;
    expect(done.abstained).toBe(false);
    const cites: { n: number; documentId: string; quote: string }[] = done.citations;
    expect(cites.length).toBeGreaterThanOrEqual(2);
    expect(new Set(cites.map((c) => c.documentId)).size).toBeLessThan(cites.length);
    expect(cites.map((c) => c.n)).toEqual(cites.map((_, i) => i + 1));
    // The citations the deltas carried, in order, are the reply's; each delta names the ones it carries.
    const deltas = frames.filter((f) => f.event === 'delta');
    expect(deltas.flatMap((d) => d.data.citations ?? [])).toEqual(cites);
    for (const d of deltas) for (const c of d.data.citations ?? []) expect(d.data.text).toContain(`[${c.n}]`);
    // What the desk does: each claim's number opens the citation whose quote is that claim.
    const byN = new Map(cites.map((c) => [c.n, c]));
    for (const claim of done.claims) {
      expect(claim.sources).toHaveLength(1);
      expect(byN.get(claim.sources[0])?.quote.replace(/\s+/g, ' ')).toContain(claim.text);
    }
  });

  it('streams an abstention as one delta with the abstention text', async () => {
    const frames = parseFrames((await post({ question: 'Who won the football league in 1987?', stream: true })).body);
    const done = frames.at(-1)?.data;
    expect(done.abstained).toBe(true);
    expect(frames.filter((f) => f.event === 'delta').map((f) => f.data.text)).toEqual([done.answer]);
  });

  it('refuses a bad body with a normal 400 before any stream starts', async () => {
    const res = await post({ question: '', stream: true });
    expect(res.statusCode).toBe(400);
    expect(res.json().error.code).toBe('SB_ERR_VALIDATION');
    expect((await post({ question: 'refund', stream: 'yes' })).statusCode).toBe(400);
  });
});

describe('POST /v1/answer streaming from a completion endpoint, over a real socket', () => {
  let stub: StubServer | null = null;
  let app: FastifyInstance | null = null;
  let dataDir = '';
  afterEach(async () => {
    // A client that hung up may leave its socket open until the keep-alive timeout; don't wait for it.
    const closing = app?.close();
    app?.server.closeAllConnections();
    await closing;
    await stub?.close();
    app = null;
    stub = null;
    if (dataDir) rmSync(dataDir, { recursive: true, force: true });
  });

  async function serve(replies: StubReply[], answerOverride?: AppDeps['answer']) {
    stub = await startStub(replies);
    dataDir = mkdtempSync(path.join(tmpdir(), 'sb-stream-'));
    const config: Readonly<Config> = loadConfig({ env: {}, overrides: { dataDir } });
    const answerer = createAnswerer({
      retrieve: async () => [wholeDoc(DOCS.refund, { score: 0.9 }), wholeDoc(DOCS.access, { score: 0.5 })],
      embedder: conceptEmbedder([], 512),
      // A generous stall limit: the tests hold the model stream open on purpose while they check the client side.
      completion: createCompletionClient({ baseUrl: stub.baseUrl, model: 'mvt-test-model', temperature: 0, maxTokens: 200, timeoutMs: 15_000, retries: 0 }),
      countTokens: countWords,
      options: { k: 8, contextBudgetTokens: 2000, minSupport: 0.5 },
    });
    const seen: { signal?: AbortSignal }[] = [];
    const deps: AppDeps = {
      logger: silentLogger(),
      isReady: () => true,
      health: () => ({}),
      collections: () => [],
      search: async () => [],
      answer:
        answerOverride ??
        ((req) => {
          seen.push(req);
          return answerer.answer(req);
        }),
    };
    app = buildApp(config, deps);
    const address = await app.listen({ port: 0, host: '127.0.0.1' });
    return { url: `${address}/v1/answer`, seen };
  }

  async function readFrames(res: Response, onFrame: (f: Frame) => void = () => undefined): Promise<Frame[]> {
    const reader = res.body!.getReader();
    const dec = new TextDecoder();
    let buf = '';
    const frames: Frame[] = [];
    for (;;) {
      const { value, done } = await reader.read();
      if (done) break;
      buf += dec.decode(value, { stream: true });
      let cut: number;
      while ((cut = buf.indexOf('\n\n')) >= 0) {
        const block = buf.slice(0, cut + 2);
        buf = buf.slice(cut + 2);
        for (const f of parseFrames(block)) {
          frames.push(f);
          onFrame(f);
        }
      }
    }
    return frames;
  }

  const ask = (url: string, signal?: AbortSignal) =>
    fetch(url, {
      method: 'POST',
      headers: { 'content-type': 'application/json' },
      body: JSON.stringify({ question: 'How long do I have to claim a delay refund?', stream: true }),
      ...(signal ? { signal } : {}),
    });

  it('passes checked sentences on while the model is still writing', async () => {
    // The model's stream holds after its second piece (a sentence is complete once the next has begun) and
    // goes on only once the first sentence has reached the client: so that sentence must have been passed on
    // while the model was still writing, whatever the machine's speed.
    const modelGoesOn = gate();
    const { url } = await serve([
      streamReply(['Claims for delay refunds must be made within 28 days of the journey [1]. ', 'Umbrellas are kept ', 'for 7 days [2].'], {
        pauseAfter: 2,
        resumeWhen: modelGoesOn.promise,
      }),
    ]);
    let firstDelta!: () => void;
    const sawDelta = new Promise<void>((r) => (firstDelta = r));
    const reading = readFrames(await ask(url), (f) => {
      if (f.event === 'delta') firstDelta();
    });
    reading.catch(() => undefined); // if the wait below fails, the stream is cut when the test tears down
    await withDeadline(sawDelta, { what: 'the first checked sentence to reach the client while the model stream is held open', timeoutMs: 10_000 });
    modelGoesOn.open();
    const frames = await withDeadline(reading, { what: 'the answer stream to end after the model finished', timeoutMs: 10_000 });
    expect(frames.map((f) => f.event)).toEqual(['sources', 'delta', 'delta', 'done']);
    expect(frames[1]?.data).toMatchObject({ text: 'Claims for delay refunds must be made within 28 days of the journey [1].' });
    expect(frames[1]?.data.citations[0]).toMatchObject({ n: 1, documentId: 'doc-refund' });
    const done = frames[3]?.data;
    expect(done.mode).toBe('generative');
    expect(shownText(frames)).toBe(done.answer);
  });

  it('replaces the shown text with an extractive answer when the model stream is cut mid-way', async () => {
    const { url } = await serve([
      { ...streamReply(['Claims for delay refunds must be made within 28 days of the journey [1]. ', 'Compensation is paid ', 'within 10 working days [1].']), cutAfter: 2, eventGapMs: 20 },
    ]);
    const frames = await readFrames(await ask(url));
    const deltas = frames.filter((f) => f.event === 'delta');
    expect(deltas[0]?.data.reset).toBeUndefined();
    expect(deltas.filter((d) => d.data.reset)).toHaveLength(1);
    const done = frames.at(-1);
    expect(done?.event).toBe('done');
    expect(done?.data).toMatchObject({ mode: 'extractive', fallbackReason: 'completion_stream_cut', abstained: false });
    expect(done?.data.answer).toContain('28 days');
    expect(shownText(frames)).toBe(done?.data.answer);
  });

  it('ends the stream with an error event when the answer fails after the stream started', async () => {
    const { url } = await serve([], async (req) => {
      (req as { onEvent?: (e: AnswerEvent) => void }).onEvent?.({ type: 'sources', sources: [] });
      throw new SourceboundError('SB_ERR_BUSY', ['completion calls']);
    });
    const frames = await readFrames(await ask(url));
    expect(frames.map((f) => f.event)).toEqual(['sources', 'error']);
    expect(frames[1]?.data.error.code).toBe('SB_ERR_BUSY');
  });

  it('cancels the answer when the client goes away mid-stream', async () => {
    // The model stream stalls after its first piece, so the answer is still running when the client leaves.
    const { url, seen } = await serve([streamReply(['Claims for delay refunds must be made within 28 days [1]. ', 'More ', 'text [1].'], { pauseAfter: 1, resumeWhen: NEVER })]);
    const ctl = new AbortController();
    const res = await ask(url, ctl.signal);
    const reader = res.body!.getReader();
    await reader.read();
    ctl.abort();
    await waitFor(() => seen[0]?.signal?.aborted, { what: "the server to cancel the answer's signal after the client hung up", timeoutMs: 10_000 });
  });
});
