#!/usr/bin/env node
// Builds the reference desk page into dist/web: the browser TypeScript through its own tsconfig
// (lib dom), then the HTML, CSS and icon copied beside it. Part of `npm run build`.
import { execFileSync } from 'node:child_process';
import { copyFileSync, mkdirSync, readdirSync, readFileSync, renameSync, rmSync } from 'node:fs';
import path from 'node:path';
import { fileURLToPath } from 'node:url';

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..', '..');
const src = path.join(root, 'src', 'web');
const out = path.join(root, 'dist', 'web');
// Built beside the target and swapped in, so a running server or a parallel build never sees half a folder.
const tmp = path.join(root, 'dist', `.web-${process.pid}`);
rmSync(tmp, { recursive: true, force: true });
mkdirSync(tmp, { recursive: true });
// The page's tsconfig is rooted at src/ (its types come from src/api), so tsc writes web/ and api/ below
// `compiled`; only web/ is the page.
const compiled = path.join(tmp, '.tsc');
execFileSync(
  process.execPath,
  [path.join(root, 'node_modules', 'typescript', 'bin', 'tsc'), '-p', path.join(src, 'tsconfig.json'), '--outDir', compiled],
  { stdio: 'inherit' },
);
for (const name of readdirSync(path.join(compiled, 'web'))) {
  const code = readFileSync(path.join(compiled, 'web', name), 'utf8');
  // The browser loads these files as they are: an import from outside the page (zod, the API's schemas) would fail there.
  const outside = [...code.matchAll(/^\s*(?:import|export)\b[^;]*?\bfrom\s+['"]([^'"]+)['"]/gm)].map((m) => m[1]).filter((s) => !s.startsWith('./'));
  if (outside.length > 0) throw new Error(`src/web/${name.replace(/\.js$/, '.ts')} imports ${outside.join(', ')} at run time; import types with \`import type\``);
  renameSync(path.join(compiled, 'web', name), path.join(tmp, name));
}
rmSync(compiled, { recursive: true, force: true });
for (const name of readdirSync(src)) {
  if (/\.(html|css|svg)$/.test(name)) copyFileSync(path.join(src, name), path.join(tmp, name));
}
rmSync(out, { recursive: true, force: true });
renameSync(tmp, out);
