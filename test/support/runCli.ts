/** Runs a qband command in-process from the repository root, capturing its streams. */
import { resolve } from 'node:path';
import { main } from '../../src/cli/main.ts';
import type { CliIo } from '../../src/cli/io.ts';

export const ROOT = resolve(new URL('../..', import.meta.url).pathname);

export async function runCli(args: string[]): Promise<{ code: number; out: string; err: string }> {
  let out = '';
  let err = '';
  const io: CliIo = { stdout: { write: (s: string) => (out += s) }, stderr: { write: (s: string) => (err += s), isTTY: false }, cwd: ROOT };
  const code = await main(args, io);
  return { code, out, err };
}
