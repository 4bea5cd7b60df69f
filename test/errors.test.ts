import { readdirSync, readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { ERROR_CODES } from '../src/errors.ts';

// The registry in src/errors.ts and the table in docs/errors.md must say the same thing.
describe('error code registry', () => {
  const doc = readFileSync(new URL('../docs/errors.md', import.meta.url), 'utf8');
  const rows = new Map(
    doc
      .split('\n')
      .filter((l) => l.startsWith('| QB_'))
      .map((l) => {
        const cells = l.split('|').map((c) => c.trim());
        return [cells[1], { meaning: cells[2], fix: cells[3] }] as const;
      }),
  );

  it('documents every code with the same meaning and fix', () => {
    for (const [code, info] of Object.entries(ERROR_CODES)) {
      expect(rows.get(code), `docs/errors.md has no row for ${code}`).toEqual({ meaning: info.meaning, fix: info.fix });
    }
  });

  it('documents no code the registry lacks', () => {
    for (const code of rows.keys()) expect(Object.keys(ERROR_CODES)).toContain(code);
  });
});

describe('codes used in the code', () => {
  const src = new URL('../src/', import.meta.url);
  const files = readdirSync(src, { recursive: true }).filter((f) => String(f).endsWith('.ts'));
  const text = files.map((f) => readFileSync(new URL(String(f), src), 'utf8')).join('\n');
  const logs = readFileSync(new URL('../docs/logs.md', import.meta.url), 'utf8');

  it('uses only registered error codes', () => {
    const used = new Set(text.match(/QB_E_[A-Z0-9_]*[A-Z0-9]\b/g));
    for (const code of used) expect(Object.keys(ERROR_CODES), `${code} is used in src/ but not registered`).toContain(code);
  });

  it('documents every event code in docs/logs.md', () => {
    const used = new Set(text.match(/QB_I_[A-Z0-9_]+/g));
    for (const code of used) expect(logs, `${code} is logged but not in docs/logs.md`).toContain(`| ${code} |`);
  });
});
