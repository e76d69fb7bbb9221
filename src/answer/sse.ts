// Server-sent events, both ways: reading the completion endpoint's stream and writing our own
// (WHATWG HTML Living Standard, "Server-sent events": events end at a blank line, `data:`
// lines of one event are joined with "\n", lines starting with ":" are comments).

/** Yields the data of each event in `body`; `onChunk` runs whenever bytes arrive. */
export async function* readEventStream(body: ReadableStream<Uint8Array>, onChunk: () => void = () => undefined): AsyncGenerator<string> {
  const decoder = new TextDecoder();
  let buffer = '';
  let data: string[] = [];
  const reader = body.getReader();
  try {
    for (;;) {
      const { value, done } = await reader.read();
      if (done) break;
      onChunk();
      buffer += decoder.decode(value, { stream: true });
      let nl: number;
      while ((nl = buffer.search(/\r\n|\r|\n/)) >= 0) {
        // A lone "\r" at the end may be the first half of "\r\n": wait for the next bytes.
        if (nl === buffer.length - 1 && buffer[nl] === '\r') break;
        const line = buffer.slice(0, nl);
        buffer = buffer.slice(nl + (buffer.startsWith('\r\n', nl) ? 2 : 1));
        if (line === '') {
          if (data.length > 0) yield data.join('\n');
          data = [];
        } else if (line.startsWith('data:')) {
          data.push(line.slice(line.startsWith('data: ') ? 6 : 5));
        }
      }
    }
    // An event not closed by a blank line is incomplete and, per the standard, dropped.
  } finally {
    reader.releaseLock();
    await body.cancel().catch(() => undefined);
  }
}

/** One event frame; multi-line data is split over several `data:` lines. */
export function sseFrame(event: string, data: unknown): string {
  const json = JSON.stringify(data);
  return `event: ${event}\n${json.split('\n').map((l) => `data: ${l}`).join('\n')}\n\n`;
}
