import { readFileSync } from 'node:fs';
import { resolve } from 'node:path';
import { describe, expect, it } from 'vitest';
import { main } from '../src/cli/main.ts';
import type { CliIo } from '../src/cli/io.ts';
import { SEPARATION_MARGIN_BASIS } from '../src/physics/separationMargin.ts';

// One wording of where the separation margin comes from, everywhere a person reads it: that
// the formula is recalled from memory, and that the API rule is for rotor critical speeds and
// only a screening figure for structural resonances. Text is compared with line breaks, comment
// markers and runs of spaces folded, since each place wraps it its own way.
const ROOT = resolve(new URL('..', import.meta.url).pathname);
const fold = (text: string) => text.replace(/^\s*\/\/ ?/gm, ' ').replace(/\s+/g, ' ');
const read = (path: string) => fold(readFileSync(resolve(ROOT, path), 'utf8'));

async function run(args: string[]): Promise<string> {
  let out = '';
  const io: CliIo = { stdout: { write: (s: string) => (out += s) }, stderr: { write: () => undefined, isTTY: false }, cwd: ROOT };
  await main(args, io);
  return out;
}

describe('separation margin wording', () => {
  it('says the formula is recalled from memory and the API rule is a screening figure here', () => {
    expect(SEPARATION_MARGIN_BASIS).toMatch(/recalled from memory/);
    expect(SEPARATION_MARGIN_BASIS).toMatch(/rotor critical speeds/);
    expect(SEPARATION_MARGIN_BASIS).toMatch(/screening figure for structural resonances/);
  });

  it('README, docs/asset-map.md and the physics test carry the same sentence', () => {
    for (const path of ['README.md', 'docs/asset-map.md', 'test/physicsSeparation.test.ts']) {
      expect(read(path), path).toContain(SEPARATION_MARGIN_BASIS);
    }
  });

  it('qband check --help, its report and its JSON carry the same sentence', async () => {
    expect(fold(await run(['check', '--help']))).toContain(SEPARATION_MARGIN_BASIS);
    expect(fold(await run(['check', 'config/demo-map.yaml']))).toContain(SEPARATION_MARGIN_BASIS);
    expect(JSON.parse(await run(['check', 'config/demo-map.yaml', '--json'])).separation_margin_basis).toBe(SEPARATION_MARGIN_BASIS);
  });

  it('no other wording of the rule is left in the documents people read', () => {
    // The old phrasings: "API 684, from the amplification factor", "as API 684 / API 617 set it".
    for (const path of ['README.md', 'docs/asset-map.md', 'docs/engine.md', 'DEVELOPERS.md']) {
      expect(read(path), path).not.toMatch(/API 684, from the amplification factor|as API 684 \/ API 617 set it/);
    }
  });
});
