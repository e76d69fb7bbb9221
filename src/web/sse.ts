// Reads server-sent events from a fetch() body (WHATWG HTML Living Standard, "Server-sent events":
// lines end in CRLF, LF or CR; an event ends at a blank line; its `data:` lines are joined with "\n";
// `event:` names it, "message" when absent; lines starting with ":" are comments). EventSource cannot
// POST or send an Authorization header, so the desk parses the stream itself.

export interface ServerEvent {
  event: string;
  data: string;
}

/** An incremental parser: feed it text as it arrives, take the complete events it returns. */
export function createEventParser(): { push(text: string): ServerEvent[]; end(): ServerEvent[] } {
  let buffer = '';
  let name = '';
  let data: string[] = [];
  let started = false;
  const line = (l: string, out: ServerEvent[]): void => {
    if (l === '') {
      if (started) out.push({ event: name || 'message', data: data.join('\n') });
      name = '';
      data = [];
      started = false;
      return;
    }
    if (l.startsWith(':')) return;
    const colon = l.indexOf(':');
    const field = colon < 0 ? l : l.slice(0, colon);
    let value = colon < 0 ? '' : l.slice(colon + 1);
    if (value.startsWith(' ')) value = value.slice(1);
    if (field === 'event') name = value;
    else if (field === 'data') {
      data.push(value);
      started = true;
    }
  };
  return {
    push(text) {
      const out: ServerEvent[] = [];
      buffer += text;
      for (;;) {
        const m = /\r\n|\r|\n/.exec(buffer);
        if (!m) break;
        // A CR at the very end may be the first half of a CRLF still on its way.
        if (m[0] === '\r' && m.index === buffer.length - 1) break;
        line(buffer.slice(0, m.index), out);
        buffer = buffer.slice(m.index + m[0].length);
      }
      return out;
    },
    // A CR held back as a possible CRLF ends its line after all; an event that no blank line
    // closed is dropped, as the standard says.
    end() {
      const out: ServerEvent[] = [];
      if (buffer.endsWith('\r')) line(buffer.slice(0, -1), out);
      buffer = '';
      data = [];
      started = false;
      return out;
    },
  };
}

/** Yields each event of a streamed response body, decoding UTF-8 across chunk boundaries. */
export async function* readServerEvents(body: ReadableStream<Uint8Array>): AsyncGenerator<ServerEvent> {
  const reader = body.getReader();
  const decoder = new TextDecoder();
  const parser = createEventParser();
  try {
    for (;;) {
      const { value, done } = await reader.read();
      if (done) break;
      yield* parser.push(decoder.decode(value, { stream: true }));
    }
    yield* parser.push(decoder.decode());
    yield* parser.end();
  } finally {
    reader.releaseLock();
  }
}
