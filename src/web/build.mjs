#!/usr/bin/env node
// Builds the reference desk page into dist/web: the browser TypeScript through its own tsconfig
// (lib dom), then the HTML, CSS and icon copied beside it. Part of `npm run build`.
import { execFileSync } from 'node:child_process';
import { copyFileSync, mkdirSync, readdirSync, renameSync, rmSync } from 'node:fs';
import path from 'node:path';
import { fileURLToPath } from 'node:url';

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..', '..');
const src = path.join(root, 'src', 'web');
const out = path.join(root, 'dist', 'web');
// Built beside the target and swapped in, so a running server or a parallel build never sees half a folder.
const tmp = path.join(root, 'dist', `.web-${process.pid}`);
rmSync(tmp, { recursive: true, force: true });
mkdirSync(tmp, { recursive: true });
execFileSync(
  process.execPath,
  [path.join(root, 'node_modules', 'typescript', 'bin', 'tsc'), '-p', path.join(src, 'tsconfig.json'), '--outDir', tmp],
  { stdio: 'inherit' },
);
for (const name of readdirSync(src)) {
  if (/\.(html|css|svg)$/.test(name)) copyFileSync(path.join(src, name), path.join(tmp, name));
}
rmSync(out, { recursive: true, force: true });
renameSync(tmp, out);
