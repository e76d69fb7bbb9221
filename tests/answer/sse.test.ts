import { describe, expect, it } from 'vitest';
import { readEventStream, sseFrame } from '../../src/answer/sse.js';

function streamOf(chunks: string[]): ReadableStream<Uint8Array> {
  const enc = new TextEncoder();
  return new ReadableStream({
    start(c) {
      for (const x of chunks) c.enqueue(enc.encode(x));
      c.close();
    },
  });
}

async function collect(chunks: string[]): Promise<string[]> {
  const out: string[] = [];
  for await (const d of readEventStream(streamOf(chunks))) out.push(d);
  return out;
}

// Framing rules from the WHATWG HTML Living Standard, section "Server-sent events".
describe('readEventStream', () => {
  it('splits events at blank lines, whatever the chunk boundaries', async () => {
    expect(await collect(['data: a\n', '\ndata: b\n\nda', 'ta: c\n\n'])).toEqual(['a', 'b', 'c']);
  });

  it('joins multi-line data with a newline and ignores comments and other fields', async () => {
    expect(await collect([': keep-alive\n\nevent: x\nid: 3\ndata: one\ndata: two\n\n'])).toEqual(['one\ntwo']);
  });

  it('accepts CRLF line ends, even when a CR and its LF arrive in different chunks', async () => {
    expect(await collect(['data: a\r', '\n\r\ndata:b\r\n\r\n'])).toEqual(['a', 'b']);
  });

  it('drops a final event that was never closed by a blank line', async () => {
    expect(await collect(['data: a\n\ndata: half'])).toEqual(['a']);
  });
});

describe('sseFrame', () => {
  it('writes a named event whose data a reader gets back intact', async () => {
    const frame = sseFrame('delta', { text: 'line one\nline two' });
    expect(frame.startsWith('event: delta\n')).toBe(true);
    expect(frame.endsWith('\n\n')).toBe(true);
    const [data] = await collect([frame]);
    expect(JSON.parse(data ?? '')).toEqual({ text: 'line one\nline two' });
  });
});
