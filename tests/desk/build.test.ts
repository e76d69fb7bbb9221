// The page the browser loads is dist/web as built (by the test setup, as by `npm run build`): its types
// come from the API's zod schemas, but only as types, so none of its modules may load anything from
// outside the page, zod included.
import { readdirSync, readFileSync } from 'node:fs';
import path from 'node:path';
import { expect, it } from 'vitest';

const WEB = path.resolve(import.meta.dirname, '..', '..', 'dist', 'web');

it('builds the desk page into modules that import only each other', () => {
  const modules = readdirSync(WEB).filter((n) => n.endsWith('.js'));
  expect(modules).toEqual(expect.arrayContaining(['desk.js', 'answer-view.js', 'reader-view.js', 'rating-view.js', 'api.js', 'types.js']));
  for (const name of modules) {
    const code = readFileSync(path.join(WEB, name), 'utf8');
    const specifiers = [...code.matchAll(/\b(?:import|export)\b[^;'"]*?\bfrom\s+['"]([^'"]+)['"]|\bimport\s*\(\s*['"]([^'"]+)['"]/g)].map((m) => m[1] ?? m[2]!);
    for (const s of specifiers) {
      expect(s, `${name} imports ${s}`).toMatch(/^\.\/[\w-]+\.js$/);
      expect(modules, `${name} imports ${s}`).toContain(s.slice(2));
    }
    expect(code, name).not.toMatch(/['"]zod['"]/);
  }
  expect(readdirSync(WEB).filter((n) => !/\.(js|css|html|svg)$/.test(n))).toEqual([]);
});
