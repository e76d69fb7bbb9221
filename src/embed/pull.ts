import { randomBytes } from 'node:crypto';
import { mkdir, open, rename, rm } from 'node:fs/promises';
import { dirname, join } from 'node:path';
import { modelPath } from './resolve.js';

/** The model hub transformers.js downloads from by default. */
export const DEFAULT_REMOTE_HOST = 'https://huggingface.co/';

export interface PullProgress {
  file: string;
  loaded?: number;
  total?: number;
}

export interface PullModelOptions {
  modelId: string;
  modelDir: string;
  quantized: boolean;
  /** Base URL ending in "/"; files are fetched from `${remoteHost}${modelId}/resolve/main/<file>`. */
  remoteHost?: string;
  onProgress?: (info: PullProgress) => void;
  /** Injected for tests and proxies; the global fetch by default. */
  fetch?: typeof fetch;
}

export interface PullResult {
  /** The model folder, `<modelDir>/<modelId>`. */
  path: string;
  /** Paths relative to `path`, in download order. */
  files: string[];
}

export function modelFilesToPull(quantized: boolean): string[] {
  return [
    `onnx/${quantized ? 'model_quantized.onnx' : 'model.onnx'}`,
    'tokenizer.json',
    'tokenizer_config.json',
    // Last on purpose: renames happen in this order and modelPresent() needs config.json, so a
    // pull interrupted between renames never looks like a complete model.
    'config.json',
  ];
}

function offlineHelp(opts: PullModelOptions, target: string, quantized: boolean): string {
  const files = modelFilesToPull(quantized).join(', ');
  return (
    `To run without network access, bake the model in instead: on a machine with internet run ` +
    `\`sourcebound model pull ${opts.modelId}\` and copy the folder, or copy ${files} ` +
    `into ${target} (for example in the container image build).`
  );
}

function describeCause(error: unknown): string {
  const cause = (error as { cause?: { code?: string; message?: string } }).cause;
  return cause?.code ?? cause?.message ?? (error instanceof Error ? error.message : String(error));
}

/** The server was reached but the transfer failed: not a network outage. */
class TransferError extends Error {}

async function download(
  url: string,
  dest: string,
  file: string,
  doFetch: typeof fetch,
  onProgress: PullModelOptions['onProgress'],
): Promise<void> {
  const response = await doFetch(url, { redirect: 'follow' });
  if (!response.ok || response.body === null) {
    throw new TransferError(`download of ${file} from ${url} failed: the server answered HTTP ${response.status}`);
  }
  const header = response.headers.get('content-length');
  const total = header === null ? undefined : Number(header);
  const handle = await open(dest, 'w');
  let loaded = 0;
  try {
    for await (const chunk of response.body as AsyncIterable<Uint8Array>) {
      await handle.write(chunk);
      loaded += chunk.byteLength;
      onProgress?.({ file, loaded, ...(total === undefined ? {} : { total }) });
    }
    // Durable before the rename makes it visible, so a crash never leaves a truncated weight file in place.
    await handle.sync();
  } finally {
    await handle.close();
  }
  if (total !== undefined && Number.isFinite(total) && loaded !== total) {
    throw new TransferError(`download of ${file} from ${url} ended early: ${loaded} of ${total} bytes`);
  }
}

/**
 * Downloads a model's config, tokenizer and ONNX weights into `<modelDir>/<modelId>/`, the layout
 * createTransformersEmbedder loads. Every file goes to a temporary name first and all are renamed
 * only after all downloads succeed, so a failed pull leaves the previous state untouched.
 */
export async function pullModel(opts: PullModelOptions): Promise<PullResult> {
  const doFetch = opts.fetch ?? fetch;
  const host = (opts.remoteHost ?? DEFAULT_REMOTE_HOST).replace(/\/*$/, '/');
  const target = modelPath(opts.modelDir, opts.modelId);
  const files = modelFilesToPull(opts.quantized);
  const suffix = `.part-${process.pid}-${randomBytes(4).toString('hex')}`;
  const staged: Array<{ temp: string; final: string }> = [];

  try {
    for (const file of files) {
      const final = join(target, file);
      const temp = final + suffix;
      await mkdir(dirname(final), { recursive: true });
      staged.push({ temp, final });
      const url = `${host}${opts.modelId}/resolve/main/${file}`;
      opts.onProgress?.({ file });
      try {
        await download(url, temp, file, doFetch, opts.onProgress);
      } catch (error) {
        if (error instanceof TransferError) {
          throw new Error(`${error.message}. ${offlineHelp(opts, target, opts.quantized)}`, { cause: error });
        }
        throw new Error(
          `cannot download ${file} from ${url}: the network is unreachable (${describeCause(error)}). ` +
            offlineHelp(opts, target, opts.quantized),
          { cause: error },
        );
      }
    }
    for (const { temp, final } of staged) await rename(temp, final);
  } catch (error) {
    await Promise.all(staged.map(({ temp }) => rm(temp, { force: true })));
    throw error;
  }
  return { path: target, files };
}
