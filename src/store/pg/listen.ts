// A connection of its own that LISTENs for committed changes of the log (corpus.ts notifies at each commit) and
// wakes the node's follower. It reconnects by itself after the server or the network drops it; a notification
// sent while it was away is not replayed, which is why the follower also polls.

import { newSession, type PgSession } from './connect.js';
import { CHANGE_CHANNEL } from './corpus.js';

export interface ChangeListener {
  /** True while the LISTEN connection is up. */
  readonly listening: boolean;
  close(): Promise<void>;
}

export function listenForChanges(
  url: string,
  handlers: { onChange: () => void; onState?: (listening: boolean, err?: Error) => void },
  opts: { retryMs?: number; connectTimeoutMs?: number } = {},
): ChangeListener {
  const retryMs = opts.retryMs ?? 1000;
  let client: PgSession | null = null;
  let listening = false;
  let closed = false;
  let retry: NodeJS.Timeout | undefined;

  const setState = (up: boolean, err?: Error): void => {
    if (listening === up && !err) return;
    listening = up;
    handlers.onState?.(up, err);
  };
  const scheduleRetry = (err?: Error): void => {
    setState(false, err);
    if (closed || retry) return;
    retry = setTimeout(() => {
      retry = undefined;
      void connect();
    }, retryMs);
    retry.unref();
  };
  const connect = async (): Promise<void> => {
    if (closed) return;
    const c = newSession(url, opts.connectTimeoutMs ?? 5000);
    client = c;
    let failed = false;
    const drop = (err?: Error): void => {
      if (failed) return;
      failed = true;
      if (client === c) client = null;
      c.end().catch(() => {});
      scheduleRetry(err);
    };
    c.on('error', (err) => drop(err));
    c.on('end', () => drop());
    c.on('notification', (n) => {
      if (n.channel === CHANGE_CHANNEL) handlers.onChange();
    });
    try {
      await c.connect();
      await c.query(`LISTEN ${CHANGE_CHANNEL}`);
      if (closed) {
        await c.end().catch(() => {});
        return;
      }
      setState(true);
      // Changes committed while no listener was up: the follower reads from its position, which covers them.
      handlers.onChange();
    } catch (err) {
      drop(err as Error);
    }
  };
  void connect();
  return {
    get listening() {
      return listening;
    },
    async close() {
      closed = true;
      if (retry) clearTimeout(retry);
      const c = client;
      client = null;
      listening = false;
      if (c) await c.end().catch(() => {});
    },
  };
}
