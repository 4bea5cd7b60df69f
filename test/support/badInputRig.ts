/**
 * What the bad-input tests share: a scratch folder, the demo map to vary, and a run of the
 * command line in-process that checks the promises every case keeps (no stack trace, nothing
 * unsafe echoed, QB_E_USAGE iff exit 2).
 */
import { mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { expect } from 'vitest';
import type { CliIo } from '../../src/cli/io.ts';
import { main } from '../../src/cli/main.ts';
import { isPrintable } from '../../src/text/printable.ts';

export const ROOT = resolve(new URL('../..', import.meta.url).pathname);
export const dir = mkdtempSync(join(tmpdir(), 'qband-bad-'));
export const DEMO_MAP = readFileSync(join(ROOT, 'config/demo-map.yaml'), 'utf8');
export const ALARM = '    alarm: { on_delay_s: 30, off_delay_s: 10, deadband_pct: 1, priority: high }';
const ALARM_LINE = ALARM;

let fileNo = 0;
export function file(content: string | Buffer, ext: string): string {
  const p = join(dir, `f${fileNo++}${ext}`);
  writeFileSync(p, content);
  return p;
}

/** The demo map with an analysis block (or other text) added to its asset. */
export function mapWith(extra: string): string {
  expect(DEMO_MAP).toContain(ALARM_LINE);
  return file(DEMO_MAP.replace(ALARM_LINE, `${ALARM_LINE}\n    ${extra}`), '.yaml');
}

export async function run(...args: string[]): Promise<{ code: number; out: string; err: string }> {
  let out = '';
  let err = '';
  const io: CliIo = { stdout: { write: (s: string) => (out += s) }, stderr: { write: (s: string) => (err += s), isTTY: false }, cwd: ROOT };
  const code = await main(args, io);
  // The promises every case keeps: no stack trace, nothing unsafe echoed, QB_E_USAGE iff 2.
  expect(err, 'a stack trace reached the user').not.toMatch(/^\s+at .+[(:]\d+/m);
  expect(isPrintable(err + out), 'a control or bidi character reached the terminal').toBe(true);
  expect(err.includes('[QB_E_USAGE]'), `QB_E_USAGE iff exit 2 (exit ${code}): ${err}`).toBe(code === 2);
  return { code, out, err };
}

/** A CSV recording: `rows` frames of the demo map's two channels at `rateHz`. */
export function csvRecording(rows: number, rateHz: number, value: (i: number) => string = () => '0'): string {
  const lines = ['time_s,acc,tach'];
  for (let i = 0; i < rows; i++) lines.push(`${i / rateHz},${value(i)},0`);
  return file(`${lines.join('\n')}\n`, '.csv');
}
