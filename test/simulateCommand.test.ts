import { describe, expect, it } from 'vitest';

// `qband simulate` as a command on real files: outputs, reproducibility, the committed demo
// recording, refusals and exit codes.

describe('qband simulate (command, real files)', async () => {
  const { mkdtempSync, readFileSync, writeFileSync } = await import('node:fs');
  const { tmpdir } = await import('node:os');
  const { join } = await import('node:path');
  const { runSimulate } = await import('../src/cli/simulate.ts');
  const { readWavInfo, readWavBlocks } = await import('../src/acquisition/wav.ts');
  const dir = mkdtempSync(join(tmpdir(), 'qband-sim-'));
  const repo = new URL('..', import.meta.url).pathname;
  const call = async (...args: string[]) => {
    let out = '', err = '';
    const code = await runSimulate(args, { stdout: { write: (s: string) => (out += s) }, stderr: { write: (s: string) => (err += s) }, cwd: repo });
    return { code, out, err };
  };
  // The demo map with a 12-second profile of its own.
  const shortProfile = join(dir, 'short.yaml');
  writeFileSync(shortProfile, 'asset: cw-pump-2\nsample_rate_hz: 2560\nstart_rpm: 600\nsegments:\n  - { hold_s: 2 }\n  - { ramp_to_rpm: 1200, over_s: 10 }\nforcing:\n  1x: 0.02\n  vane-pass: 0.01\nnoise_g: 0.001\nseed: 3\n');

  it('writes a pcm16 WAV with sensor and tach channels, a speed CSV, and a one-line summary', async () => {
    const wav = join(dir, 'short.wav');
    const csv = join(dir, 'speed.csv');
    const r = await call('--map', 'config/demo-map.yaml', '--profile', shortProfile, '-o', wav, '--format', 'pcm16', `--speed-out=${csv}`);
    expect(r.err).toBe('');
    expect(r.code).toBe(0);
    expect(r.out).toMatch(/^wrote .*short\.wav: cw-pump-2, 12\.0 s at 2560 Hz, 2 channels \(0 motor-top-x \(g\), 1 tach \(1 pulse\/rev\)\), pcm16, 0\.12 MB; speed series in .*speed\.csv\n$/);
    expect(await readWavInfo(wav)).toEqual({ sampleRateHz: 2560, channels: 2, frames: 12 * 2560, format: 'pcm16' });
    let tachMax = 0;
    for await (const b of readWavBlocks(wav, 4096)) tachMax = Math.max(tachMax, ...b.channels[1]);
    expect(tachMax).toBe(0.5); // pcm16 tach level; 0.5 is exact in 16-bit PCM
    const rows = readFileSync(csv, 'utf8').trim().split('\n');
    expect(rows[0]).toBe('time_s,rpm');
    expect(rows.length).toBe(1 + 121); // 0.0 .. 12.0 s every 0.1 s
    expect(rows[71]).toBe('7.0,900.00'); // 600 + 600 x (7 - 2)/10, hand computation
  });

  it('same profile and seed give byte-identical files', async () => {
    const a = join(dir, 'a.wav'), b = join(dir, 'b.wav');
    await call('--map', 'config/demo-map.yaml', '--profile', shortProfile, '-o', a);
    await call('--map', 'config/demo-map.yaml', '--profile', shortProfile, '-o', b);
    expect(readFileSync(a).equals(readFileSync(b))).toBe(true);
  });

  it('an invalid profile exits 1 with every located problem on stderr', async () => {
    const bad = join(dir, 'bad.yaml');
    writeFileSync(bad, 'asset: cw-pump-2\nsample_rate_hz: 2560\nstart_rpm: 600\nsegments: [ { hold_s: 1 } ]\nforcing:\n  1X: 0.02\n');
    const r = await call('--map', 'config/demo-map.yaml', '--profile', bad, '-o', join(dir, 'never.wav'));
    expect(r.code).toBe(1);
    expect(r.err).toBe(`${bad}: error QB_E_PROFILE_ASSET forcing.1X: asset 'cw-pump-2' has no order '1X' (its orders: 1x, 2x, vane-pass, motor-bpfo) (line 6, col 3)\n`);
  });

  it('command-line mistakes exit 2 with QB_E_USAGE', async () => {
    expect((await call('--map', 'config/demo-map.yaml')).err).toMatch(/missing --profile <file> \[QB_E_USAGE\]/);
    expect((await call('--map', 'x', '--profile', 'y', '-o', 'z', '--format', 'pcm24')).err).toMatch(/--format must be one of float32, pcm16, got 'pcm24'/);
    expect((await call('--bogus')).code).toBe(2);
  });

  it('an --asset the map lacks is an input that cannot be used: exit 1, QB_E_ASSET_UNKNOWN', async () => {
    const r = await call('--map', 'config/demo-map.yaml', '--profile', shortProfile, '-o', join(dir, 'x.wav'), '--asset', 'cw-pump-9');
    expect([r.code, r.err]).toEqual([1, "qband simulate: no asset 'cw-pump-9' in the map; it has: cw-pump-2 [QB_E_ASSET_UNKNOWN]\n"]);
  });

  it('an unwritable output is QB_E_FILE_WRITE, exit 1', async () => {
    const r = await call('--map', 'config/demo-map.yaml', '--profile', shortProfile, '-o', join(dir, 'no-such-dir', 'x.wav'));
    expect(r.code).toBe(1);
    expect(r.err).toMatch(/cannot create .*\[QB_E_FILE_WRITE\]/);
  });

  it('the committed demo recording is what the demo map and profile produce', async () => {
    const demo = join(repo, 'demo/north-basin-runup.wav');
    const again = join(dir, 'demo.wav');
    const r = await call('--map', 'config/demo-map.yaml', '--profile', 'config/demo-profile.yaml', '-o', again, '--format', 'pcm16');
    expect(r.code).toBe(0);
    expect(readFileSync(again).equals(readFileSync(demo)), 'demo/north-basin-runup.wav is stale: regenerate it with the command in docs/simulate.md').toBe(true);
  });

  it('shows progress on stderr only when it is a terminal', async () => {
    let err = '';
    const code = await runSimulate(['--map', 'config/demo-map.yaml', '--profile', shortProfile, '-o', join(dir, 'tty.wav')], {
      stdout: { write: () => true },
      stderr: { write: (s: string) => (err += s), isTTY: true },
      cwd: repo,
    });
    expect(code).toBe(0);
    expect(err).toContain('simulate [');
    expect(err).toContain('100% 12/12 s');
  });

  it('--help prints the options', async () => {
    const r = await call('--help');
    expect(r.code).toBe(0);
    expect(r.out).toContain('--speed-out <file>');
  });
});
