import { readdirSync, readFileSync, statSync } from 'node:fs';
import { dirname, join, relative, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';

// Import rules of the project (DEVELOPERS.md, "Architecture"): the pure core never reaches for
// I/O, clocks, brokers or loggers, and no module imports itself round a cycle.
const SRC = resolve(dirname(fileURLToPath(import.meta.url)), '../src');
const CORE = ['manipulation', 'transients', 'physics', 'detection', 'identification', 'advisory', 'engine', 'render'];
const FORBIDDEN_IN_CORE = [/^mqtt/, /^rxjs/, /^pino/, /^cli-progress/, /^node:(fs|net|http|https|child_process|process|timers)/];
const ADAPTER_FOLDERS = ['cli', 'agent'];

function walk(dir: string): string[] {
  return readdirSync(dir).flatMap((name) => {
    const path = join(dir, name);
    return statSync(path).isDirectory() ? walk(path) : path.endsWith('.ts') ? [path] : [];
  });
}

function importsOf(file: string): string[] {
  const text = readFileSync(file, 'utf8');
  const found: string[] = [];
  for (const m of text.matchAll(/^\s*(?:import|export)[^'"]*?from\s+['"]([^'"]+)['"]/gm)) found.push(m[1]);
  for (const m of text.matchAll(/import\(\s*['"]([^'"]+)['"]\s*\)/g)) found.push(m[1]);
  return found;
}

const files = walk(SRC);
const graph = new Map(
  files.map((f) => [
    f,
    importsOf(f)
      .filter((s) => s.startsWith('.'))
      .map((s) => resolve(dirname(f), s)),
  ]),
);

describe('architecture', () => {
  it('keeps the core free of brokers, streams, loggers, files and clocks', () => {
    const offences: string[] = [];
    for (const f of files) {
      const folder = relative(SRC, f).split('/')[0];
      if (!CORE.includes(folder)) continue;
      for (const spec of importsOf(f)) {
        if (FORBIDDEN_IN_CORE.some((re) => re.test(spec))) offences.push(`${relative(SRC, f)} imports ${spec}`);
        if (spec.startsWith('.')) {
          const target = relative(SRC, resolve(dirname(f), spec)).split('/')[0];
          if (ADAPTER_FOLDERS.includes(target)) offences.push(`${relative(SRC, f)} imports adapter ${spec}`);
        }
      }
      const text = readFileSync(f, 'utf8');
      if (/\b(Date\.now|new Date\(\s*\)|performance\.now|process\.)/.test(text)) offences.push(`${relative(SRC, f)} reads a clock or the process`);
    }
    expect(offences).toEqual([]);
  });

  it('has no import cycles', () => {
    const cycles: string[] = [];
    const state = new Map<string, 'visiting' | 'done'>();
    const stack: string[] = [];
    const visit = (f: string) => {
      if (state.get(f) === 'done') return;
      if (state.get(f) === 'visiting') {
        cycles.push(stack.slice(stack.indexOf(f)).concat(f).map((x) => relative(SRC, x)).join(' -> '));
        return;
      }
      state.set(f, 'visiting');
      stack.push(f);
      for (const g of graph.get(f) ?? []) if (graph.has(g)) visit(g);
      stack.pop();
      state.set(f, 'done');
    };
    for (const f of files) visit(f);
    expect(cycles).toEqual([]);
  });
});
