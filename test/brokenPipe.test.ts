// Output into a pipe whose reader goes away (`qband ... | head -1`): the command ends quietly,
// no EPIPE trace, as a process (the error only exists on a real pipe).
import { spawn } from 'node:child_process';
import { mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { describe, expect, it } from 'vitest';

const ROOT = resolve(new URL('..', import.meta.url).pathname);
const BIN = join(ROOT, 'bin/qband.mjs');

/** Runs qband, reads stdout until the first newline, then closes the pipe as `head -1` does. */
function firstLineThenClose(args: string[]): Promise<{ code: number | null; signal: NodeJS.Signals | null; first: string; err: string }> {
  return new Promise((done, fail) => {
    const child = spawn(process.execPath, [BIN, ...args], { cwd: ROOT, stdio: ['ignore', 'pipe', 'pipe'] });
    let first = '';
    let err = '';
    let closed = false;
    child.stdout.on('data', (chunk: Buffer) => {
      if (closed) return;
      first += chunk.toString('utf8');
      if (first.includes('\n')) {
        closed = true;
        first = first.slice(0, first.indexOf('\n'));
        child.stdout.destroy();
      }
    });
    child.stderr.on('data', (chunk: Buffer) => (err += chunk.toString('utf8')));
    child.on('error', fail);
    child.on('close', (code, signal) => done({ code, signal, first, err }));
  });
}

describe('2. a reader that goes away ends the command quietly', () => {
  it('replay with a status record every second, read one line', async () => {
    const r = await firstLineThenClose(['replay', '--map', 'config/demo-map.yaml', '--status-every', '1', 'demo/north-basin-runup.wav']);
    expect(JSON.parse(r.first).kind).toBe('status');
    expect(r.err).toBe('');
    expect([r.code, r.signal]).toEqual([0, null]);
  }, 60_000);

  it('check on a map whose report is far larger than a pipe holds, read one line', async () => {
    const demo = readFileSync(join(ROOT, 'config/demo-map.yaml'), 'utf8');
    const assetStart = demo.indexOf('  - id: cw-pump-2');
    const asset = demo.slice(assetStart);
    const assets = Array.from({ length: 300 }, (_, i) =>
      asset.replace('id: cw-pump-2', `id: cw-pump-${i}`).replace('channel: 1,', 'channel: 1, topic: t/' + i + '/tach,'),
    );
    const dir = mkdtempSync(join(tmpdir(), 'qband-pipe-'));
    const map = join(dir, 'many.yaml');
    writeFileSync(map, `${demo.slice(0, assetStart)}${assets.join('\n')}`);
    const r = await firstLineThenClose(['check', map]);
    expect(r.first).toMatch(/valid asset map for site north-basin \(300 assets\)/);
    expect(r.err).toBe('');
    expect([r.code, r.signal]).toEqual([0, null]);
  }, 60_000);

  it('demo --json, read one line: the run ends early and everything stops', async () => {
    const r = await firstLineThenClose(['demo', '--json', '--speed', '100']);
    expect(JSON.parse(r.first)).toHaveProperty('topic');
    expect(r.err).toBe('');
    expect([r.code, r.signal]).toEqual([0, null]);
  }, 60_000);
});
