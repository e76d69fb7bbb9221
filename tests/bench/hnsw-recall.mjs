// HNSW recall@10 against exact search, by efSearch, at 100k vectors of 384 dimensions; build time and memory;
// plus a small (M, efConstruction) sweep at 20k to justify the build parameters.
import { statSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import hnswlib from 'hnswlib-node';
import { clusteredVectors, latencySummary } from './generate.mjs';

const { HierarchicalNSW } = hnswlib;

function exactTop(data, q, k) {
  const best = [];
  for (let id = 0; id < data.length; id++) {
    const v = data[id];
    let s = 0;
    for (let i = 0; i < q.length; i++) s += q[i] * v[i];
    if (best.length < k || s > best[best.length - 1].s) {
      best.push({ id, s });
      best.sort((a, b) => b.s - a.s);
      if (best.length > k) best.pop();
    }
  }
  return best.map((b) => b.id);
}

function build(data, dims, m, efConstruction) {
  const rssBefore = process.memoryUsage().rss;
  const t0 = performance.now();
  const index = new HierarchicalNSW('ip', dims);
  index.initIndex({ maxElements: data.length, m, efConstruction, randomSeed: 100 });
  for (let i = 0; i < data.length; i++) index.addPoint(Array.from(data[i]), i);
  const seconds = (performance.now() - t0) / 1000;
  const dir = mkdtempSync(path.join(tmpdir(), 'sb-bench-'));
  const file = path.join(dir, 'index.hnsw');
  index.writeIndexSync(file);
  const fileBytes = statSync(file).size;
  rmSync(dir, { recursive: true, force: true });
  return { index, seconds, fileBytes, rssGrowth: process.memoryUsage().rss - rssBefore };
}

function measure(index, queries, truth, ef, k = 10) {
  index.setEf(ef);
  const ms = [];
  let found = 0;
  for (let qi = 0; qi < queries.length; qi++) {
    const q = Array.from(queries[qi]);
    const t0 = performance.now();
    const res = index.searchKnn(q, k);
    ms.push(performance.now() - t0);
    const want = new Set(truth[qi]);
    for (const id of res.neighbors) if (want.has(id)) found++;
  }
  return { ef, recall: found / (queries.length * k), ...latencySummary(ms) };
}

export async function runHnswBench({ count = 100_000, dims = 384, queries = 300, log = () => {} } = {}) {
  const all = clusteredVectors({ count: count + queries, dims, seed: 7 });
  const data = all.slice(0, count);
  const qs = all.slice(count);
  log(`exact top-10 for ${queries} queries over ${count} vectors`);
  const truth = qs.map((q) => exactTop(data, q, 10));

  log('parameter sweep at 20k');
  const small = data.slice(0, 20_000);
  const smallTruth = qs.map((q) => exactTop(small, q, 10));
  const sweep = [];
  for (const m of [8, 16, 32]) {
    for (const efc of [100, 200]) {
      const b = build(small, dims, m, efc);
      for (const ef of [32, 64, 128]) sweep.push({ m, efConstruction: efc, buildSeconds: b.seconds, ...measure(b.index, qs, smallTruth, ef) });
    }
  }

  log(`building ${count} x ${dims}, M=16, efConstruction=200`);
  const big = build(data, dims, 16, 200);
  const byEf = [16, 32, 64, 128, 256, 512].map((ef) => measure(big.index, qs, truth, ef));
  return { count, dims, queries, build: { m: 16, efConstruction: 200, seconds: big.seconds, fileBytes: big.fileBytes, rssGrowth: big.rssGrowth }, byEf, sweep };
}
