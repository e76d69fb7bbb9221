import { readdir, mkdtemp, readFile, rm } from 'node:fs/promises';
import { createServer, type Server } from 'node:http';
import type { AddressInfo } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { pullModel, type PullProgress } from '../../src/embed/pull.js';
import { modelPresent } from '../../src/embed/resolve.js';
import { createTransformersEmbedder } from '../../src/embed/transformers.js';
import { tinyModelFiles, tinyTable, tinyVocab } from '../fixtures/tiny-model.js';
import { meanPoolNormalise, referenceWordPiece } from './wordpiece-reference.js';

const MODEL_ID = 'test/tiny-bert';
const DIMS = 16;
const vocab = tinyVocab();
const table = tinyTable(vocab.length, DIMS, 7);
const files = tinyModelFiles(vocab, table, DIMS, undefined);

let server: Server;
let host: string;
const requested: string[] = [];
const tempDirs: string[] = [];

async function tempDir(): Promise<string> {
  const dir = await mkdtemp(join(tmpdir(), 'sourcebound-pull-'));
  tempDirs.push(dir);
  return dir;
}

async function listRecursive(dir: string): Promise<string[]> {
  const entries = await readdir(dir, { recursive: true, withFileTypes: true }).catch(() => []);
  return entries.filter((e) => e.isFile()).map((e) => join(e.parentPath ?? e.path, e.name).slice(dir.length + 1));
}

beforeAll(async () => {
  // Serves the tiny model under the hub's path template: /<model>/resolve/<revision>/<file>.
  const prefix = `/${MODEL_ID}/resolve/main/`;
  server = createServer((req, res) => {
    const url = req.url ?? '';
    requested.push(url);
    const body = url.startsWith(prefix) ? files.get(url.slice(prefix.length)) : undefined;
    if (body === undefined) {
      res.writeHead(404).end('not found');
      return;
    }
    res.writeHead(200, { 'content-length': body.byteLength, 'content-type': 'application/octet-stream' }).end(body);
  });
  await new Promise<void>((resolve) => server.listen(0, '127.0.0.1', resolve));
  host = `http://127.0.0.1:${(server.address() as AddressInfo).port}/`;
});

afterAll(async () => {
  await new Promise((resolve) => server.close(resolve));
  await Promise.all(tempDirs.map((d) => rm(d, { recursive: true, force: true })));
});

describe('pullModel', () => {
  it('writes the files in the layout the transformers embedder loads', async () => {
    const modelDir = await tempDir();
    const progress: PullProgress[] = [];
    const result = await pullModel({ modelId: MODEL_ID, modelDir, quantized: true, remoteHost: host, onProgress: (p) => progress.push(p) });

    expect(result.path).toBe(join(modelDir, 'test', 'tiny-bert'));
    expect(result.files.sort()).toEqual(['config.json', 'onnx/model_quantized.onnx', 'tokenizer.json', 'tokenizer_config.json']);
    // No temporary files left behind.
    expect((await listRecursive(result.path)).sort()).toEqual(result.files);
    for (const file of result.files) {
      expect((await readFile(join(result.path, file))).equals(files.get(file) as Uint8Array)).toBe(true);
    }
    expect(modelPresent(modelDir, MODEL_ID, true)).toBe(true);

    const last = progress.filter((p) => p.file === 'onnx/model_quantized.onnx').at(-1);
    expect(last?.loaded).toBe(files.get('onnx/model_quantized.onnx')?.byteLength);
    expect(last?.total).toBe(last?.loaded);

    const embedder = await createTransformersEmbedder({ modelId: MODEL_ID, modelDir, quantized: true });
    const text = 'Refund claims for a late tram';
    const ids = [vocab.indexOf('[CLS]'), ...referenceWordPiece(text, vocab), vocab.indexOf('[SEP]')];
    const expected = meanPoolNormalise(ids, table, DIMS);
    const [vector] = await embedder.embed([text]);
    expected.forEach((x, d) => expect(Math.abs((vector as Float32Array)[d]! - x)).toBeLessThan(1e-5));
  });

  it('fetches the full-precision weights when asked for them', async () => {
    const modelDir = await tempDir();
    const result = await pullModel({ modelId: MODEL_ID, modelDir, quantized: false, remoteHost: host.slice(0, -1) });
    expect(result.files).toContain('onnx/model.onnx');
    expect(result.files).not.toContain('onnx/model_quantized.onnx');
    expect(requested).toContain(`/${MODEL_ID}/resolve/main/onnx/model.onnx`);
  });

  it('says the network is unreachable and how to bake the model in when nothing answers', async () => {
    const closed = createServer();
    await new Promise<void>((resolve) => closed.listen(0, '127.0.0.1', resolve));
    const port = (closed.address() as AddressInfo).port;
    await new Promise((resolve) => closed.close(resolve));

    const modelDir = await tempDir();
    await expect(pullModel({ modelId: MODEL_ID, modelDir, quantized: true, remoteHost: `http://127.0.0.1:${port}/` })).rejects.toThrow(
      /network is unreachable.*bake the model in/s,
    );
    expect(await listRecursive(modelDir)).toEqual([]);
    expect(modelPresent(modelDir, MODEL_ID, true)).toBe(false);
  });

  it('reports the HTTP status and leaves nothing behind when the model is not on the server', async () => {
    const modelDir = await tempDir();
    await expect(pullModel({ modelId: 'test/absent-model', modelDir, quantized: true, remoteHost: host })).rejects.toThrow(/HTTP 404/);
    expect(await listRecursive(modelDir)).toEqual([]);
  });

  it('keeps earlier files out of place when a later file fails', async () => {
    // config.json is renamed last, so a pull that fails part-way never looks like a complete model.
    const modelDir = await tempDir();
    const failing: typeof fetch = async (input, init) => {
      if (String(input).endsWith('tokenizer_config.json')) throw new TypeError('fetch failed', { cause: { code: 'ECONNRESET' } });
      return fetch(input, init);
    };
    await expect(pullModel({ modelId: MODEL_ID, modelDir, quantized: true, remoteHost: host, fetch: failing })).rejects.toThrow(/ECONNRESET/);
    expect(await listRecursive(modelDir)).toEqual([]);
  });
});
