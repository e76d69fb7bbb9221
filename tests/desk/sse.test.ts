import { describe, expect, it } from 'vitest';
import { sseFrame } from '../../src/answer/sse.js';
import { createEventParser, readServerEvents } from '../../src/web/sse.js';

const streamOf = (parts: Uint8Array[]): ReadableStream<Uint8Array> =>
  new ReadableStream({
    start(c) {
      for (const p of parts) c.enqueue(p);
      c.close();
    },
  });

async function collect(parts: Uint8Array[]) {
  const out = [];
  for await (const e of readServerEvents(streamOf(parts))) out.push(e);
  return out;
}

describe('the desk reads server-sent events', () => {
  // The example stream of the WHATWG HTML Living Standard, "Server-sent events" § 9.2.5:
  // three data lines make one event whose data is joined with line feeds; a comment line is ignored.
  it('joins data lines with "\\n" and skips comments, as in the standard\'s example', () => {
    const p = createEventParser();
    expect(p.push(': test stream\n\ndata: first event\nid: 1\n\ndata:second event\nid\n\ndata:  third event\n\n')).toEqual([
      { event: 'message', data: 'first event' },
      { event: 'message', data: 'second event' },
      // Only one leading space is removed.
      { event: 'message', data: ' third event' },
    ]);
    expect(p.push('data: YHOO\ndata: +2\ndata: 10\n\n')).toEqual([{ event: 'message', data: 'YHOO\n+2\n10' }]);
  });

  it('reads event names, and accepts CRLF and lone CR line ends', () => {
    const p = createEventParser();
    expect(p.push('event: sources\r\ndata: {"a":1}\r\n\r\nevent: done\rdata: 2\r\r')).toEqual([{ event: 'sources', data: '{"a":1}' }]);
    // The last CR might be the first half of a CRLF: the event completes at the next byte, or at the end.
    expect(p.end()).toEqual([{ event: 'done', data: '2' }]);
  });

  it('drops an event that no blank line closed', () => {
    const p = createEventParser();
    expect(p.push('event: delta\ndata: half')).toEqual([]);
    expect(p.end()).toEqual([]);
  });

  it('parses what the service writes (sseFrame), however the bytes are split, multi-byte characters included', async () => {
    const events = [
      ['sources', { sources: [{ n: 1, title: 'Fares — Zones A–C', text: 'line one\nline two' }] }],
      ['delta', { text: 'A Day Rider costs £8.40 [1].' }],
      ['done', { answer: 'A Day Rider costs £8.40 [1].', abstained: false }],
    ] as const;
    const bytes = new TextEncoder().encode(`: keep-alive\n\n${events.map(([e, d]) => sseFrame(e, d)).join('')}`);
    for (const step of [1, 2, 3, 7, 64, bytes.length]) {
      const parts: Uint8Array[] = [];
      for (let i = 0; i < bytes.length; i += step) parts.push(bytes.subarray(i, i + step));
      const got = await collect(parts);
      expect(got.map((e) => e.event), `step ${step}`).toEqual(['sources', 'delta', 'done']);
      expect(got.map((e) => JSON.parse(e.data))).toEqual(events.map(([, d]) => d));
    }
  });
});
