#!/usr/bin/env node
// Draws a V8 CPU profile (a .cpuprofile written by `node --cpu-prof`, e.g. by `tests/bench/load.mjs --cpu-prof DIR`)
// as a flame graph in SVG: one box per call path, its width the share of samples taken under it (self time plus
// callees), callers below callees, frames under `--min` of all samples left out. Frames are named
// "function file:line"; idle and garbage-collector samples keep V8's own names.
// Usage: node tests/bench/flame.mjs PROFILE.cpuprofile OUT.svg [--min 0.005] [--title "..."]
import { readFileSync, writeFileSync } from 'node:fs';
import path from 'node:path';
import { parseArgs } from 'node:util';

const { values, positionals } = parseArgs({ allowPositionals: true, options: { min: { type: 'string', default: '0.005' }, title: { type: 'string', default: 'CPU profile' } } });
const [input, output] = positionals;
if (!input || !output) {
  console.error('usage: node tests/bench/flame.mjs PROFILE.cpuprofile OUT.svg [--min 0.005] [--title TEXT]');
  process.exit(2);
}
const profile = JSON.parse(readFileSync(input, 'utf8'));
const byId = new Map(profile.nodes.map((n) => [n.id, n]));
// Samples per node, from the sample list (hitCount is not always filled in).
const hits = new Map();
for (const id of profile.samples ?? []) hits.set(id, (hits.get(id) ?? 0) + 1);
const total = [...hits.values()].reduce((a, b) => a + b, 0) || 1;
const name = (n) => {
  const f = n.callFrame;
  const file = f.url ? path.basename(f.url.replace(/^file:\/\//, '')) : '';
  return `${f.functionName || '(anonymous)'}${file ? ` ${file}:${f.lineNumber + 1}` : ''}`;
};
// Inclusive samples of each node.
const inclusive = new Map();
const sum = (n) => {
  let s = hits.get(n.id) ?? 0;
  for (const c of n.children ?? []) s += sum(byId.get(c));
  inclusive.set(n.id, s);
  return s;
};
const root = profile.nodes[0];
sum(root);

const W = 1200;
const ROW = 16;
const min = Number(values.min);
const boxes = [];
let depthMax = 0;
const lay = (n, x, depth) => {
  const share = inclusive.get(n.id) / total;
  if (share < min) return;
  depthMax = Math.max(depthMax, depth);
  boxes.push({ x, w: share * W, depth, label: depth === 0 ? 'all samples' : name(n), share });
  let cx = x;
  for (const c of [...(n.children ?? [])].map((id) => byId.get(id)).sort((a, b) => inclusive.get(b.id) - inclusive.get(a.id))) {
    lay(c, cx, depth + 1);
    cx += (inclusive.get(c.id) / total) * W;
  }
};
lay(root, 0, 0);
const H = (depthMax + 1) * ROW + 40;
const esc = (s) => s.replace(/&/g, '&amp;').replace(/</g, '&lt;').replace(/>/g, '&gt;');
const colour = (label) => {
  let h = 0;
  for (const ch of label) h = (h * 31 + ch.charCodeAt(0)) >>> 0;
  return `hsl(${20 + (h % 40)}, 80%, ${55 + (h % 20)}%)`;
};
const rects = boxes
  .map((b) => {
    const y = H - 10 - (b.depth + 1) * ROW;
    const text = b.w > 40 ? `<text x="${(b.x + 3).toFixed(1)}" y="${(y + 12).toFixed(1)}">${esc(b.label.slice(0, Math.floor(b.w / 6.5)))}</text>` : '';
    return `<g><title>${esc(b.label)} — ${(b.share * 100).toFixed(1)}%</title><rect x="${b.x.toFixed(1)}" y="${y}" width="${Math.max(0.5, b.w - 0.5).toFixed(1)}" height="${ROW - 1}" fill="${colour(b.label)}"/>${text}</g>`;
  })
  .join('\n');
writeFileSync(
  output,
  `<svg xmlns="http://www.w3.org/2000/svg" width="${W}" height="${H}" font-family="monospace" font-size="11">\n<text x="4" y="16" font-size="13">${esc(values.title)} (${total} samples; frames under ${(min * 100).toFixed(1)}% left out)</text>\n${rects}\n</svg>\n`,
);
console.log(`${boxes.length} frames, ${total} samples -> ${output}`);
