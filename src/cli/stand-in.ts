// The server's stand-in while it starts: before the runtime is built (schema migrations, a first
// load of an older store can take tens of seconds at 100k chunks, all synchronous on the main
// thread), a worker thread holds the port and answers `/health` (200, not ready), `/ready` (503) and
// everything else with the API's 503 `SB_ERR_NOT_READY` and Retry-After. A monitor never sees a
// dead port during start-up; the main thread blocking does not matter, the worker has its own loop.
// When the service is built, the stand-in closes (in-flight replies finish) and the service takes
// the port at once.

import { Worker } from 'node:worker_threads';
import { ERRORS } from '../errors.js';

export interface StandIn {
  /** The port the stand-in listens on (the configured one, or the one the system chose for port 0). */
  port: number;
  /** Stops listening and waits for the worker to end. */
  close(): Promise<void>;
}

// The worker's code: plain JavaScript, no imports beyond node:http and node:worker_threads.
const WORKER = `
const { createServer } = require('node:http');
const { parentPort, workerData } = require('node:worker_threads');
const send = (res, status, body, extra) => {
  res.writeHead(status, { 'content-type': 'application/json; charset=utf-8', 'cache-control': 'no-store', ...extra });
  res.end(JSON.stringify(body));
};
const server = createServer((req, res) => {
  const url = (req.url || '').split('?')[0];
  if (req.method === 'GET' && url === '/health') return send(res, 200, { status: 'ok', starting: true, ready: false });
  if (req.method === 'GET' && url === '/ready') return send(res, 503, { status: 'loading' }, { 'retry-after': '1' });
  send(res, 503, { error: { code: 'SB_ERR_NOT_READY', message: workerData.message } }, { 'retry-after': '1' });
});
server.keepAliveTimeout = 1000;
server.on('error', (err) => parentPort.postMessage({ error: err.message, code: err.code }));
server.listen({ host: workerData.host, port: workerData.port }, () => parentPort.postMessage({ port: server.address().port }));
parentPort.on('message', (m) => {
  if (m !== 'close') return;
  server.close(() => process.exit(0));
  server.closeIdleConnections();
});
`;

/** Starts the stand-in on host:port; rejects when the port cannot be taken (as listen would). */
export function startStandIn(host: string, port: number): Promise<StandIn> {
  // No inherited flags: the code is CommonJS whatever the parent was started with (--input-type, say).
  const worker = new Worker(WORKER, { eval: true, execArgv: [], workerData: { host, port, message: ERRORS.SB_ERR_NOT_READY.message } });
  return new Promise<StandIn>((resolve, reject) => {
    worker.once('error', reject);
    worker.once('message', (m: { port?: number; error?: string; code?: string }) => {
      if (m.port === undefined) {
        void worker.terminate();
        reject(Object.assign(new Error(`cannot listen on ${host}:${port}: ${m.error ?? 'unknown error'}`), { code: m.code }));
        return;
      }
      const exited = new Promise<void>((done) => worker.once('exit', () => done()));
      resolve({
        port: m.port,
        close: async () => {
          worker.postMessage('close');
          await exited;
        },
      });
    });
  });
}
