// The import rules of DEVELOPERS.md ("Layout"), checked on the source: every import statement of
// src/ is read (plain text parsing, no compiler), and the test fails on an import circle between
// files and on an import that goes up the layer table.
import { readdirSync, readFileSync, statSync } from 'node:fs';
import { dirname, join, relative, resolve } from 'node:path';
import { describe, expect, it } from 'vitest';

const SRC = resolve(import.meta.dirname, '../src');

/** Which layers each layer may import (besides itself). `config` is src/config.ts, `entry` src/server.ts and src/main.ts. */
export const ALLOWED: Record<string, string[]> = {
  core: [],
  config: [],
  models: ['core'],
  store: ['core', 'config'],
  workers: ['core', 'models'],
  services: ['core', 'models', 'store', 'workers', 'config'],
  api: ['core', 'models', 'store', 'workers', 'services', 'config'],
  jobs: ['core', 'models', 'store', 'workers', 'services', 'config'],
  entry: ['core', 'models', 'store', 'workers', 'services', 'api', 'jobs', 'config'],
  scenario: ['core', 'models', 'store', 'workers', 'services', 'api', 'jobs', 'config', 'entry'],
};

function sourceFiles(dir: string): string[] {
  const out: string[] = [];
  for (const name of readdirSync(dir)) {
    const path = join(dir, name);
    if (statSync(path).isDirectory()) out.push(...sourceFiles(path));
    else if (/\.(ts|mjs|js)$/.test(name) && !path.includes(`${join('api', 'page')}`)) out.push(path);
  }
  return out;
}

/** Relative specifiers of import/export-from statements, dynamic imports and `new URL(…, import.meta.url)` worker entries. */
export function importSpecifiers(text: string): string[] {
  // Comments out first, so an example in a comment is not read as an import.
  const code = text.replace(/\/\*[\s\S]*?\*\//g, '').replace(/(^|[^:'"])\/\/.*$/gm, '$1');
  const out: string[] = [];
  const patterns = [
    /^\s*(?:import|export)\s[^;'"]*?\sfrom\s*['"]([^'"]+)['"]/gm,
    /^\s*import\s*['"]([^'"]+)['"]/gm,
    /\bimport\(\s*['"]([^'"]+)['"]\s*\)/g,
    /new URL\(\s*['"]([^'"]+)['"]\s*,\s*import\.meta\.url\s*\)/g,
  ];
  for (const re of patterns) for (const m of code.matchAll(re)) if (m[1].startsWith('.')) out.push(m[1]);
  return out;
}

function layerOf(file: string): string {
  const rel = relative(SRC, file).split(/[\\/]/);
  if (rel.length === 1) return rel[0] === 'config.ts' ? 'config' : 'entry';
  return rel[0];
}

function importGraph(): Map<string, string[]> {
  const graph = new Map<string, string[]>();
  for (const file of sourceFiles(SRC)) {
    const targets = importSpecifiers(readFileSync(file, 'utf8'))
      .map((s) => resolve(dirname(file), s))
      .filter((t) => t.startsWith(SRC));
    graph.set(file, targets);
  }
  return graph;
}

/** Every circle of imports, each as the list of files around it (Tarjan's strongly connected components). */
export function importCircles(graph: Map<string, string[]>): string[][] {
  let index = 0;
  const idx = new Map<string, number>();
  const low = new Map<string, number>();
  const stack: string[] = [];
  const onStack = new Set<string>();
  const circles: string[][] = [];
  const visit = (v: string) => {
    idx.set(v, index);
    low.set(v, index++);
    stack.push(v);
    onStack.add(v);
    for (const w of graph.get(v) ?? []) {
      if (!graph.has(w)) continue;
      if (!idx.has(w)) {
        visit(w);
        low.set(v, Math.min(low.get(v)!, low.get(w)!));
      } else if (onStack.has(w)) low.set(v, Math.min(low.get(v)!, idx.get(w)!));
    }
    if (low.get(v) === idx.get(v)) {
      const component: string[] = [];
      let w: string;
      do {
        w = stack.pop()!;
        onStack.delete(w);
        component.push(w);
      } while (w !== v);
      if (component.length > 1 || (graph.get(v) ?? []).includes(v)) circles.push(component);
    }
  };
  for (const v of graph.keys()) if (!idx.has(v)) visit(v);
  return circles;
}

describe('import rules of src/', () => {
  const graph = importGraph();
  const rel = (f: string) => relative(SRC, f);

  it('reads the imports it is meant to check', () => {
    // The parser finds the kinds of import the codebase uses (a check of the check).
    expect(importSpecifiers("import type { A } from './a.ts';\nimport {\n  b,\n  c,\n} from '../b.ts';\nexport { d } from './d.ts';\n// import { e } from './e.ts';\nconst w = new URL('./w.mjs', import.meta.url);")).toEqual(['./a.ts', '../b.ts', './d.ts', './w.mjs']);
    expect(importCircles(new Map([['a', ['b']], ['b', ['a']], ['c', ['a']]])).map((c) => c.sort())).toEqual([['a', 'b']]);
    expect(graph.size).toBeGreaterThan(100);
    expect(graph.get(join(SRC, 'server.ts'))).toContain(join(SRC, 'api/app.ts'));
  });

  it('has no import circles', () => {
    expect(importCircles(graph).map((c) => c.map(rel).sort())).toEqual([]);
  });

  it('imports only down the layer table', () => {
    const upward: string[] = [];
    for (const [file, targets] of graph) {
      const from = layerOf(file);
      const allowed = ALLOWED[from];
      expect(allowed, `layer of ${rel(file)}`).toBeDefined();
      for (const t of targets) {
        const to = layerOf(t);
        if (to !== from && !allowed.includes(to)) upward.push(`${rel(file)} (${from}) imports ${rel(t)} (${to})`);
      }
    }
    expect(upward).toEqual([]);
  });
});
