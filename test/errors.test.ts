import { readFileSync } from 'node:fs';
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
