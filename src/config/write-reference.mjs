#!/usr/bin/env node
// Regenerates config/default.json (the schema's defaults) and the option table in docs/configuration.md
// (what `sourcebound config --reference` prints) from the built schema. Run after changing
// src/config/schema.ts: `npm run config:docs`. tests/config/load.test.ts checks both stay in step.
import { readFileSync, writeFileSync } from 'node:fs';
import path from 'node:path';
import { fileURLToPath } from 'node:url';

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..', '..');
const { configSchema, configReference } = await import(path.join(root, 'dist', 'config', 'index.js'));

writeFileSync(path.join(root, 'config', 'default.json'), JSON.stringify(configSchema.parse({}), null, 2) + '\n');

const docPath = path.join(root, 'docs', 'configuration.md');
const doc = readFileSync(docPath, 'utf8');
const start = doc.indexOf('## Every option');
const end = doc.indexOf('\n## ', start + 1);
if (start < 0 || end < 0) throw new Error('docs/configuration.md: cannot find the "## Every option" section');
const next = doc.slice(0, start) + '## Every option\n\n' + configReference().trimEnd() + '\n' + doc.slice(end);
writeFileSync(docPath, next);
console.log('config/default.json and docs/configuration.md regenerated');
