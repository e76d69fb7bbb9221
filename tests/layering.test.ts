import { mkdtempSync, readdirSync, readFileSync, rmSync, writeFileSync, mkdirSync, existsSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import ts from 'typescript';
import { describe, expect, it } from 'vitest';

// Imports run one way and only src/store/ talks to the database. The import statements are read with the
// TypeScript compiler's own parser (ts.createSourceFile), so comments and strings that merely look like imports
// are not counted; cycles are the strongly connected components of the graph (Tarjan 1972).

const SRC = path.resolve(import.meta.dirname, '..', 'src');
const SOURCE_FILE = /\.(ts|mts|mjs)$/;
/**
 * SQL statements begin like one of these (upper case, as every statement in the code base is written);
 * a verb alone is not enough, since route names such as "DELETE /v1/..." use HTTP's verbs.
 */
const SQL = /\b(SELECT\b|INSERT\s+(?:OR\s+\w+\s+)?INTO\b|UPDATE\s+\w+\s+SET\b|DELETE\s+FROM\b|CREATE\s+(?:UNIQUE\s+|VIRTUAL\s+)?(?:TABLE|INDEX|TRIGGER|VIEW)\b|PRAGMA\b)/;

interface Analysis {
  /** file → files it imports (relative to the root, '/'-separated). */
  edges: Map<string, string[]>;
  /** Each string literal that reads as SQL: file, line and the text. */
  sql: { file: string; line: number; text: string }[];
  /** Files importing a database driver directly (better-sqlite3, or node-postgres `pg`). */
  driver: string[];
}

function walk(dir: string): string[] {
  return readdirSync(dir, { withFileTypes: true }).flatMap((e) => {
    const full = path.join(dir, e.name);
    if (e.isDirectory()) return walk(full);
    return SOURCE_FILE.test(e.name) && !e.name.endsWith('.d.ts') ? [full] : [];
  });
}

/** The source file an import specifier names, or null for a package. */
function resolve(from: string, spec: string): string | null {
  if (!spec.startsWith('.')) return null;
  const base = path.resolve(path.dirname(from), spec);
  const candidates = [base, base.replace(/\.js$/, '.ts'), base.replace(/\.mjs$/, '.mts'), `${base}.ts`, path.join(base, 'index.ts')];
  return candidates.find((c) => SOURCE_FILE.test(c) && existsSync(c)) ?? null;
}

function analyse(root: string): Analysis {
  const edges = new Map<string, string[]>();
  const sql: Analysis['sql'] = [];
  const driver: string[] = [];
  const rel = (f: string): string => path.relative(root, f).split(path.sep).join('/');
  for (const file of walk(root)) {
    const text = readFileSync(file, 'utf8');
    const sf = ts.createSourceFile(file, text, ts.ScriptTarget.Latest, true, file.endsWith('.mjs') ? ts.ScriptKind.JS : ts.ScriptKind.TS);
    const targets: string[] = [];
    const specifier = (spec: string): void => {
      if (spec === 'better-sqlite3' || spec === 'pg' || spec.startsWith('pg/')) driver.push(rel(file));
      const target = resolve(file, spec);
      if (target) targets.push(rel(target));
    };
    const visit = (node: ts.Node): void => {
      // import ... from '...', export ... from '...', import type ... (type-only imports count: a cycle of types
      // is still two modules that each need the other).
      if ((ts.isImportDeclaration(node) || ts.isExportDeclaration(node)) && node.moduleSpecifier && ts.isStringLiteral(node.moduleSpecifier)) {
        specifier(node.moduleSpecifier.text);
      } else if (ts.isCallExpression(node) && node.expression.kind === ts.SyntaxKind.ImportKeyword && node.arguments[0] && ts.isStringLiteralLike(node.arguments[0])) {
        specifier(node.arguments[0].text);
      } else if (ts.isImportTypeNode(node) && ts.isLiteralTypeNode(node.argument) && ts.isStringLiteral(node.argument.literal)) {
        specifier(node.argument.literal.text);
      }
      const literal =
        ts.isStringLiteral(node) || ts.isNoSubstitutionTemplateLiteral(node) || ts.isTemplateHead(node) || ts.isTemplateMiddle(node) || ts.isTemplateTail(node)
          ? node.text
          : null;
      // Module specifiers are string literals too; they are not SQL.
      if (literal !== null && SQL.test(literal) && !(node.parent && (ts.isImportDeclaration(node.parent) || ts.isExportDeclaration(node.parent)))) {
        sql.push({ file: rel(file), line: sf.getLineAndCharacterOfPosition(node.getStart(sf)).line + 1, text: literal.trim().slice(0, 80) });
      }
      ts.forEachChild(node, visit);
    };
    visit(sf);
    edges.set(rel(file), [...new Set(targets)]);
  }
  return { edges, sql, driver };
}

/** Strongly connected components of more than one file (or a file importing itself): the import cycles. */
function cycles(edges: Map<string, string[]>): string[][] {
  let counter = 0;
  const index = new Map<string, number>();
  const low = new Map<string, number>();
  const stack: string[] = [];
  const onStack = new Set<string>();
  const out: string[][] = [];
  const connect = (v: string): void => {
    index.set(v, counter);
    low.set(v, counter++);
    stack.push(v);
    onStack.add(v);
    for (const w of edges.get(v) ?? []) {
      if (!index.has(w)) {
        connect(w);
        low.set(v, Math.min(low.get(v)!, low.get(w)!));
      } else if (onStack.has(w)) low.set(v, Math.min(low.get(v)!, index.get(w)!));
    }
    if (low.get(v) === index.get(v)) {
      const component: string[] = [];
      let w: string;
      do {
        w = stack.pop()!;
        onStack.delete(w);
        component.push(w);
      } while (w !== v);
      if (component.length > 1 || (edges.get(v) ?? []).includes(v)) out.push(component.sort());
    }
  };
  for (const v of [...edges.keys()].sort()) if (!index.has(v)) connect(v);
  return out;
}

describe('the import graph of src/', () => {
  const { edges, sql, driver } = analyse(SRC);

  it('reads every source file and its imports', () => {
    expect(edges.size).toBeGreaterThan(100);
    expect(edges.get('runtime.ts')).toEqual(expect.arrayContaining(['store/index.ts', 'api/app.ts', 'jobs/index.ts']));
  });

  it('has no import cycle', () => {
    expect(cycles(edges), 'files that import each other, directly or through others').toEqual([]);
  });

  it('has SQL only in src/store/', () => {
    expect(sql.filter((s) => !s.file.startsWith('store/')), 'SQL outside the store').toEqual([]);
    // The check sees the store's own statements, so it would see them anywhere else too.
    expect(sql.some((s) => s.file === 'store/sqlite/corpus.ts' && s.text.startsWith('INSERT INTO documents'))).toBe(true);
  });

  it('opens the database driver only in src/store/', () => {
    expect(driver.filter((f) => !f.startsWith('store/'))).toEqual([]);
    expect(driver).toContain('store/sqlite/db.ts');
    // node-postgres is opened in one file, which owns the pool and its type parsers.
    expect(driver.filter((f) => f.startsWith('store/pg/'))).toEqual(['store/pg/connect.ts']);
  });

  it('points stages one way: only commands import the composition root, and the store imports no other stage', () => {
    // The command handlers (src/cli/), the job worker thread and the eval commands, which build runtimes of their own.
    const importers = [...edges].filter(([, to]) => to.includes('runtime.ts')).map(([from]) => from);
    expect(importers.sort()).toEqual(['cli/ingest.ts', 'cli/prepare.ts', 'cli/serve-pg.ts', 'cli/serve.ts', 'cli/worker.ts', 'eval/answers.ts', 'eval/retrieval.ts', 'job-worker.ts']);
    const stages = ['api/', 'answer/', 'retrieve/', 'ingest/', 'embed/', 'jobs/', 'eval/', 'feedback/', 'web/', 'config/'];
    const fromStore = [...edges].filter(([from]) => from.startsWith('store/')).flatMap(([from, to]) => to.filter((t) => stages.some((s) => t.startsWith(s))).map((t) => `${from} → ${t}`));
    expect(fromStore).toEqual([]);
  });
});

describe('the import-graph check itself', () => {
  it('finds a cycle, a self-import and SQL in a string, in a folder made to hold them', () => {
    const dir = mkdtempSync(path.join(tmpdir(), 'sb-layering-'));
    try {
      mkdirSync(path.join(dir, 'a'));
      writeFileSync(path.join(dir, 'a', 'one.ts'), "import { two } from '../b.js';\nexport const one = () => two;\n");
      writeFileSync(path.join(dir, 'b.ts'), "import type { three } from './c.js';\nexport const two = 2; export type T = three;\n");
      writeFileSync(path.join(dir, 'c.ts'), "export type three = typeof import('./a/one.js');\n");
      writeFileSync(path.join(dir, 'self.ts'), "export * from './self.js';\n");
      writeFileSync(path.join(dir, 'q.ts'), "// SELECT in a comment is not a string\nconst q = `DELETE FROM jobs WHERE id = ${1}`;\nexport const n = q.length;\n");
      const got = analyse(dir);
      expect(cycles(got.edges)).toEqual([['a/one.ts', 'b.ts', 'c.ts'], ['self.ts']]);
      expect(got.sql).toEqual([{ file: 'q.ts', line: 2, text: 'DELETE FROM jobs WHERE id =' }]);
    } finally {
      rmSync(dir, { recursive: true, force: true });
    }
  });
});
