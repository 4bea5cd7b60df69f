// Bad input, as a new user or a hostile file would give it: every case ends with a clear
// message carrying its code and the promised exit code; never a stack trace, a hang or a
// blow-up. One `describe` per finding of the bad-input review (numbered as there).
import { chmodSync, mkdirSync, mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { describe, expect, it } from 'vitest';
import { readWavBlocks } from '../src/acquisition/wav.ts';
import { encodeWav } from '../src/acquisition/wavWriter.ts';
import { EXIT_CODES_HELP, type CliIo } from '../src/cli/io.ts';
import { main } from '../src/cli/main.ts';
import { parseAssetMap } from '../src/config/parseAssetMap.ts';
import { isPrintable } from '../src/text/printable.ts';

const ROOT = resolve(new URL('..', import.meta.url).pathname);
const dir = mkdtempSync(join(tmpdir(), 'qband-bad-'));
const DEMO_MAP = readFileSync(join(ROOT, 'config/demo-map.yaml'), 'utf8');
const ALARM_LINE = '    alarm: { on_delay_s: 30, off_delay_s: 10, deadband_pct: 1, priority: high }';

let fileNo = 0;
function file(content: string | Buffer, ext: string): string {
  const p = join(dir, `f${fileNo++}${ext}`);
  writeFileSync(p, content);
  return p;
}

/** The demo map with an analysis block (or other text) added to its asset. */
function mapWith(extra: string): string {
  expect(DEMO_MAP).toContain(ALARM_LINE);
  return file(DEMO_MAP.replace(ALARM_LINE, `${ALARM_LINE}\n    ${extra}`), '.yaml');
}

async function run(...args: string[]): Promise<{ code: number; out: string; err: string }> {
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
function csvRecording(rows: number, rateHz: number, value: (i: number) => string = () => '0'): string {
  const lines = ['time_s,acc,tach'];
  for (let i = 0; i < rows; i++) lines.push(`${i / rateHz},${value(i)},0`);
  return file(`${lines.join('\n')}\n`, '.csv');
}

describe('1. a missing, directory or unreadable map: a clean error in every command', () => {
  const missing = join(dir, 'no-such-map.yaml');
  const folder = join(dir, 'a-folder.yaml');
  mkdirSync(folder);
  const cases: Array<[string, string[]]> = [
    ['replay', ['replay', '--map', '%MAP%', 'demo/north-basin-runup.wav']],
    ['check', ['check', '%MAP%']],
    ['simulate', ['simulate', '--map', '%MAP%', '--profile', 'config/demo-profile.yaml', '-o', join(dir, 'never.wav')]],
    ['run', ['run', '--map', '%MAP%', '--no-state', '--no-watch', '--log-level', 'error']],
  ];
  for (const [command, args] of cases) {
    for (const [what, path, reason] of [
      ['missing', missing, 'no such file'],
      ['a directory', folder, 'it is a directory'],
    ] as const) {
      it(`${command}: ${what} map is exit 1 with QB_E_FILE_READ on one line`, async () => {
        const r = await run(...args.map((a) => (a === '%MAP%' ? path : a)));
        expect(r.code).toBe(1);
        expect(r.err).toBe(`qband ${command}: cannot read asset map '${path}' (${reason}) [QB_E_FILE_READ]\n`);
      });
    }
  }

  it('a map without read permission is QB_E_FILE_READ too (skipped as root, who may read anything)', async (ctx) => {
    if (process.getuid?.() === 0) {
      console.log('skipped: running as root, file permissions do not stop reads');
      ctx.skip();
    }
    const p = file(DEMO_MAP, '.yaml');
    chmodSync(p, 0o000);
    const r = await run('check', p);
    expect(r.code).toBe(1);
    expect(r.err).toMatch(/permission denied.*\[QB_E_FILE_READ\]/);
  });
});

describe('3. a CSV recording whose time column implies an absurd sample rate', () => {
  it('two rows 1e12 s apart (1e-12 Hz) are refused, naming the rate, instead of spinning', async () => {
    const csv = file('time_s,acc,tach\n0,0,0\n1e12,0,0\n', '.csv');
    const r = await run('replay', '--map', 'config/demo-map.yaml', csv);
    expect(r.code).toBe(1);
    expect(r.err).toMatch(/sample rate 1e-12 Hz is outside the 1 Hz to 1000000 Hz qband reads \[QB_E_CSV_FORMAT\]/);
  });
});

describe('4-6. analysis keys: check refuses what replay or run would refuse, or could not run', () => {
  const cases: Array<[string, string, RegExp]> = [
    ['decision_step_s 1e-9 (would hang replay)', 'analysis: { decision_step_s: 1e-9 }', /analysis\.decision_step_s: must be a number >= 0\.01 and <= 60, got 1e-9 \(line 35, col \d+\)/],
    ['frame_size 4194304 with 100000 averages (about 1.7 TB)', 'analysis: { frame_size: 4194304, decimation: 1, averages: 100000 }', /analysis\.averages: must be an integer >= 1 and <= 1000, got 100000 \(line 35/],
    ['averages 100000000 (refused only by replay before)', 'analysis: { averages: 100000000 }', /analysis\.averages: must be an integer >= 1 and <= 1000, got 100000000 \(line 35/],
    ['a frame and averages whose spectrum needs 444 MiB a sensor', 'analysis: { frame_size: 1048576, averages: 100 }', /analysis\.averages: frame_size 1048576 with averages 100 needs 444\.0 MiB per sensor, more than the 64\.0 MiB allowed/],
    ['decimation beyond the decimator', 'analysis: { decimation: 131072 }', /analysis\.decimation: must be an integer >= 1 and <= 65536, got 131072/],
    ['overlap 0.9999 (an FFT every sample)', 'analysis: { overlap: 0.9999 }', /analysis\.overlap: must be a number >= 0 and <= 0\.9, got 0\.9999/],
  ];
  for (const [what, block, message] of cases) {
    it(`${what}: check and replay both exit 1 with the key, line and column`, async () => {
      const map = mapWith(block);
      const check = await run('check', map);
      expect(check.code).toBe(1);
      expect(check.err).toMatch(message);
      expect(check.err).toMatch(/QB_E_CONFIG_RANGE/);
      const replay = await run('replay', '--map', map, 'demo/north-basin-runup.wav');
      expect(replay.code).toBe(1);
      expect(replay.err).toMatch(message);
    });
  }

  it('agent keys the sequencer would refuse (reorder_window 5000) are refused by check', async () => {
    const map = file(DEMO_MAP.replace('site: north-basin', 'site: north-basin\nagent: { reorder_window: 5000 }'), '.yaml');
    const r = await run('check', map);
    expect(r.code).toBe(1);
    expect(r.err).toMatch(/agent\.reorder_window: must be an integer >= 0 and <= 1024, got 5000 \(line 15, col \d+\)/);
  });

  it('6. a recording at 1e12 Hz is refused by a message that names the rate', async () => {
    const csv = file('time_s,acc,tach\n0,0,0\n1e-12,0,0\n2e-12,0,0\n', '.csv');
    const r = await run('replay', '--map', 'config/demo-map.yaml', csv);
    expect(r.code).toBe(1);
    expect(r.err).toMatch(/sample rate 1e\+12 Hz is outside the 1 Hz to 1000000 Hz qband reads \[QB_E_CSV_FORMAT\]/);
  });
});

describe('7. input size and problem count are capped', () => {
  it('a map over 1 MiB is refused without being parsed (QB_E_CONFIG_TOO_LARGE)', async () => {
    const big = file(`site: x\nassets:\n${'  - {id: a}\n'.repeat(120_000)}`, '.yaml');
    const r = await run('check', big);
    expect(r.code).toBe(1);
    expect(r.err).toMatch(/is larger than 1\.0 MiB, the most qband reads \[QB_E_CONFIG_TOO_LARGE\]\n$/);
  });

  it('a map with thousands of problems lists 100 and counts the rest', async () => {
    const many = file(`site: x\nassets:\n${Array.from({ length: 3000 }, (_, i) => `  - {id: a${i}}\n`).join('')}`, '.yaml');
    const r = await run('check', many);
    expect(r.code).toBe(1);
    const lines = r.err.trimEnd().split('\n');
    expect(lines.filter((l) => / error QB_E_/.test(l))).toHaveLength(100);
    // Each of the 3000 assets lacks speed, orders, sensors, components and alarm.
    expect(r.err).toContain('and 14900 more problems not listed');
    expect(lines.at(-1)).toMatch(/not valid, 15000 problems$/);
    const json = await run('check', many, '--json');
    const doc = JSON.parse(json.out);
    expect([doc.problems.length, doc.problems_not_listed]).toEqual([100, 14_900]);
  });
});

describe('8. a WAV of many channels: bounded, and only bound channels decoded', () => {
  it('32,767 channels are refused naming the count (QB_E_WAV_FORMAT)', async () => {
    const header = encodeWav([new Float32Array(1)], 1000, 'pcm16');
    // Patch the plain fmt chunk: channels 32767, block align 65534, byte rate to match.
    header.writeUInt16LE(32767, 22);
    header.writeUInt32LE(1000 * 65534, 28);
    header.writeUInt16LE(65534, 32);
    header.writeUInt32LE(0, 40);
    const wav = file(header.subarray(0, 44), '.wav');
    const r = await run('replay', '--map', 'config/demo-map.yaml', wav);
    expect(r.code).toBe(1);
    expect(r.err).toMatch(/32767 channels, more than the 1024 qband reads \[QB_E_WAV_FORMAT\]/);
  });

  it('a selection decodes those channels only, equal to a full decode', async () => {
    const n = 1000;
    const channels = Array.from({ length: 6 }, (_, c) => Float32Array.from({ length: n }, (_, i) => Math.sin(i * (c + 1) * 0.01)));
    const wav = file(encodeWav(channels, 8000, 'pcm24'), '.wav');
    for await (const b of readWavBlocks(wav, 300, [1, 4])) {
      expect(b.channels.map((c) => c.length)).toEqual([0, b.channels[1].length, 0, 0, b.channels[1].length, 0]);
      for (const c of [1, 4]) {
        for (let i = 0; i < b.channels[c].length; i++) expect(b.channels[c][i]).toBeCloseTo(channels[c][b.startFrame + i], 6);
      }
    }
  });
});

describe('9. echoed values are escaped and cut short', () => {
  it('a site with ESC, BEL, NUL and a bidi override is shown escaped', async () => {
    const map = file('site: "x\\e]0;pwned\\a\\0\\u202eevil"\nassets: 1\n', '.yaml');
    const r = await run('check', map);
    expect(r.code).toBe(1);
    expect(r.err).toContain(String.raw`got 'x\x1b]0;pwned\x07\x00\u202eevil'`);
  });

  it('a huge scalar is cut with a count of what was left out', async () => {
    const map = file(`site: ${'z'.repeat(500_000)}\nassets: 1\n`, '.yaml');
    const r = await run('check', map);
    expect(r.code).toBe(1);
    expect(r.err).toMatch(/got 'z{80}\.\.\. \(499920 more characters\)'/);
    for (const line of r.err.split('\n')) expect(line.length).toBeLessThan(1000);
  });

  it('kilobytes of a binary file given as a map come back printable and short', async () => {
    const bytes = Buffer.alloc(64 * 1024);
    for (let i = 0; i < bytes.length; i++) bytes[i] = (i * 7919 + 13) % 256;
    const r = await run('check', file(bytes, '.yaml'));
    expect(r.code).toBe(1);
    expect(r.err.length).toBeLessThan(100 * 1000);
  });

  it('free text (description, procedure) is escaped in the check report', async () => {
    const map = file(DEMO_MAP.replace('description: Vertical', 'description: "\\e[31mred\\e[0m Vertical'), '.yaml');
    const fixed = readFileSync(map, 'utf8').replace('red\\e[0m Vertical cooling-water pump on a variable-speed drive', 'red\\e[0m Vertical"');
    writeFileSync(map, fixed);
    const r = await run('check', map);
    expect(r.code).toBe(0);
    expect(r.out).toContain(String.raw`cw-pump-2: \x1b[31mred\x1b[0m Vertical`);
  });
});

describe('10. non-finite and out-of-range samples are counted, reported and left out', () => {
  it('NaN in a float WAV: a warning with the count, unusable_samples in the summary', async () => {
    const fs = 2560;
    const frames = fs * 20;
    const acc = Float32Array.from({ length: frames }, (_, i) => 0.01 * Math.sin((2 * Math.PI * 20 * i) / fs));
    const tach = Float32Array.from({ length: frames }, (_, i) => (i % 256 < 10 ? 5 : 0));
    for (let i = 5000; i < 5100; i++) acc[i] = Number.NaN;
    acc[9000] = Number.POSITIVE_INFINITY;
    acc[9001] = 3e30;
    const wav = file(encodeWav([acc, tach], fs, 'float32'), '.wav');
    const r = await run('replay', '--map', 'config/demo-map.yaml', wav);
    expect(r.code).toBe(0);
    expect(r.err).toMatch(/102 samples of channel 0 not finite or beyond \+-1000000, treated as missing data \[QB_E_SAMPLE_RANGE\]/);
    const summary = JSON.parse(r.out.trim().split('\n').at(-1) as string);
    expect(summary.kind).toBe('summary');
    expect(summary.unusable_samples).toBe(102);
    expect(JSON.stringify(summary)).not.toMatch(/NaN|Infinity|null,"zone"/);
  });

  it('a CSV cell 1e39 (Infinity as float32) is missing data, counted', async () => {
    const csv = csvRecording(3000, 1000, (i) => (i === 1500 ? '1e39' : '0'));
    const r = await run('replay', '--map', 'config/demo-map.yaml', csv);
    expect(r.code).toBe(0);
    expect(r.err).toMatch(/1 sample of channel 0 not finite or beyond/);
    expect(JSON.parse(r.out.trim().split('\n').at(-1) as string).unusable_samples).toBe(1);
  });

  it('numbers are read one way everywhere: 0x10 is refused by the recording CSV as by the speed CSV', async () => {
    const csv = csvRecording(100, 1000, (i) => (i === 50 ? '0x10' : '0'));
    const r = await run('replay', '--map', 'config/demo-map.yaml', csv);
    expect(r.code).toBe(1);
    expect(r.err).toMatch(/column 'acc' holds '0x10', expected a finite decimal number \[QB_E_CSV_FORMAT\]/);
    const speed = file('time_s,rpm\n0,0x10\n', '.csv');
    const s = await run('replay', '--map', 'config/demo-map.yaml', '--speed', speed, 'demo/north-basin-runup.wav');
    expect(s.code).toBe(1);
    expect(s.err).toMatch(/rpm must be a finite decimal number, got '0x10' \[QB_E_SPEED_CSV\]/);
  });
});

describe('11. deep nesting', () => {
  it('10,000 flow levels: "nested too deeply" at its line, not a stack overflow', () => {
    const r = parseAssetMap(`site: x\nassets: ${'['.repeat(10_000)}${']'.repeat(10_000)}\n`, 'deep.yaml');
    expect(r.problems.map((p) => [p.code, p.line])).toEqual([['QB_E_CONFIG_TOO_LARGE', 2]]);
    expect(r.problems[0].message).toMatch(/nested too deeply/);
    expect(JSON.stringify(r)).not.toMatch(/call stack/);
  });

  it('1,000 block levels: the same, at the line where the limit is passed', () => {
    const text = `site: x\nassets:\n${Array.from({ length: 1000 }, (_, i) => `${' '.repeat(i + 1)}- `).join('\n')}x\n`;
    const r = parseAssetMap(text, 'deep.yaml');
    expect(r.problems).toHaveLength(1);
    expect(r.problems[0].message).toMatch(/nested too deeply here \(more than 64 levels\) \(line 66,/);
  });
});

describe('12. duplicate keys', () => {
  it('name the key and its path', () => {
    const r = parseAssetMap(DEMO_MAP.replace('{ id: motor-top-x, channel: 0, units: g }', '{ id: motor-top-x, channel: 0, channel: 1, units: g }'), 'dup.yaml');
    const dup = r.problems.find((p) => p.code === 'QB_E_CONFIG_DUPLICATE');
    expect(dup?.message).toMatch(/^assets\[0\]\.sensors\[0\]\.channel: key 'channel' appears twice in the same mapping; keep one \(line 30, col \d+\)$/);
  });
});

describe('13. one exit-code rule for every command, as README and --help say', () => {
  const readme = readFileSync(join(ROOT, 'README.md'), 'utf8');
  it('README states the rule', () => {
    expect(readme.replace(/\s+/g, ' ')).toContain('Exit codes: 0 done (or valid), 1 an input cannot be read, written or used, or is not valid');
    expect(readme.replace(/\s+/g, ' ')).toContain('2 the command line is wrong (QB_E_USAGE');
  });
  for (const command of ['check', 'replay', 'run', 'simulate', 'demo']) {
    it(`${command}: --help says the rule (0), a wrong option is 2, a missing map file is 1`, async () => {
      const help = await run(command, '--help');
      expect(help.code).toBe(0);
      expect(help.out).toContain(EXIT_CODES_HELP);
      expect((await run(command, '--no-such-option')).code).toBe(2);
      if (command === 'demo') return; // demo takes no map
      const args = {
        check: ['check', 'nope.yaml'],
        replay: ['replay', '--map', 'nope.yaml', 'x.wav'],
        run: ['run', '--map', 'nope.yaml', '--no-state', '--log-level', 'error'],
        simulate: ['simulate', '--map', 'nope.yaml', '--profile', 'p.yaml', '-o', 'x.wav'],
      }[command] as string[];
      const missing = await run(...args);
      expect(missing.code).toBe(1);
      expect(missing.err).toMatch(/\[QB_E_FILE_READ\]/);
    });
  }

  it('replay --asset naming no asset of the map is 1 with QB_E_ASSET_UNKNOWN, not a usage error', async () => {
    const r = await run('replay', '--map', 'config/demo-map.yaml', '--asset', 'nope', 'demo/north-basin-runup.wav');
    expect([r.code, r.err]).toEqual([1, "qband replay: no asset 'nope' in the map; it has: cw-pump-2 [QB_E_ASSET_UNKNOWN]\n"]);
  });

  it('an unwritable simulate -o is 1 with QB_E_FILE_WRITE', async () => {
    const r = await run('simulate', '--map', 'config/demo-map.yaml', '--profile', 'config/demo-profile.yaml', '-o', join(dir, 'missing-dir', 'x.wav'));
    expect(r.code).toBe(1);
    expect(r.err).toMatch(/cannot create \(ENOENT\) \[QB_E_FILE_WRITE\]\n$/);
  });

  it('the top level: no command or an unknown one is 2', async () => {
    expect((await run()).code).toBe(2);
    expect((await run('constructor')).code).toBe(2);
  });
});

describe('14. recording errors carry a code and name the file once', () => {
  it('a truncated WAV', async () => {
    const whole = encodeWav([new Float32Array(1000), new Float32Array(1000)], 1000, 'pcm16');
    const wav = file(whole.subarray(0, 2000), '.wav');
    const r = await run('replay', '--map', 'config/demo-map.yaml', wav);
    expect(r.code).toBe(1);
    expect(r.err).toMatch(/^qband replay: [^\n]*data chunk declares 4000 bytes but only 1956 follow it: the file is truncated \[QB_E_WAV_FORMAT\]\n$/);
    expect(r.err.split(wav).length - 1).toBe(1);
  });
});

describe('15. the WAV header walk is bounded', () => {
  function withEmptyChunks(n: number): Buffer {
    const wav = encodeWav([new Float32Array(64), new Float32Array(64)], 1000, 'pcm16');
    const fmtEnd = 12 + 8 + 16;
    const junk = Buffer.alloc(8 * n);
    for (let i = 0; i < n; i++) junk.write('junk', 8 * i, 'latin1');
    return Buffer.concat([wav.subarray(0, fmtEnd), junk, wav.subarray(fmtEnd)]);
  }

  it('1000 empty chunks before the data are walked', async () => {
    const r = await run('replay', '--map', 'config/demo-map.yaml', file(withEmptyChunks(1000), '.wav'));
    expect(r.code).toBe(0);
  });

  it('200,000 empty chunks are refused after 1024', async () => {
    const r = await run('replay', '--map', 'config/demo-map.yaml', file(withEmptyChunks(200_000), '.wav'));
    expect(r.code).toBe(1);
    expect(r.err).toMatch(/more than 1024 chunks before the data chunk.*\[QB_E_WAV_FORMAT\]/);
  });
});

describe('16. the small ones', () => {
  it('a 1 Hz recording: says every fn lies above half the sample rate, no garbled band', async () => {
    const r = await run('replay', '--map', 'config/demo-map.yaml', csvRecording(50, 1));
    expect(r.code).toBe(0);
    expect(r.err).toMatch(/every component's fn \(motor-reed 14\.2 Hz, discharge-pipe 83 Hz\) is at or above half the sample rate \(0\.5 Hz\)/);
    expect(r.err).toMatch(/half the sample rate \(0\.5 Hz\) is below the severity band \(10-1000 Hz\)/);
  });

  it('an analysis rate below 20 Hz: the severity warning says so instead of "10-1 Hz"', async () => {
    const map = mapWith('analysis: { frame_size: 32, averages: 1, decimation: 1 }');
    const r = await run('replay', '--map', map, csvRecording(400, 4, (i) => String(Math.sin(i))));
    expect(r.code).toBe(0);
    const summary = JSON.parse(r.out.trim().split('\n').at(-1) as string);
    expect(summary.warnings.join('\n')).toMatch(/analysis rate 4 Hz is too low for the severity band: half of it, 2 Hz, is below the band's lower edge of 10 Hz/);
    expect(summary.warnings.join('\n')).not.toMatch(/10-[0-9] Hz/);
  });

  it('--status-every: empty, hexadecimal and negative values are refused by the value check', async () => {
    const base = ['replay', '--map', 'config/demo-map.yaml'];
    const empty = await run(...base, '--status-every=', 'demo/north-basin-runup.wav');
    expect(empty.err).toMatch(/--status-every needs a value/);
    const hex = await run(...base, '--status-every', '0x10', 'demo/north-basin-runup.wav');
    expect(hex.err).toMatch(/--status-every must be a number of seconds from 0 to 86400, got '0x10'/);
    const negative = await run(...base, '--status-every', '-1', 'demo/north-basin-runup.wav');
    expect(negative.err).toMatch(/--status-every must be a number of seconds from 0 to 86400, got '-1'/);
    expect(negative.err).not.toMatch(/ambiguous/);
    for (const r of [empty, hex, negative]) expect(r.code).toBe(2);
  });

  it('a 0-sample WAV is refused with QB_E_RECORDING_EMPTY, not a silent exit 0', async () => {
    const wav = file(encodeWav([new Float32Array(0), new Float32Array(0)], 2560, 'pcm16'), '.wav');
    const r = await run('replay', '--map', 'config/demo-map.yaml', wav);
    expect(r.code).toBe(1);
    expect(r.err).toMatch(/holds no samples \(0 frames\): nothing to replay \[QB_E_RECORDING_EMPTY\]/);
  });

  it('an id of 100,000 characters is refused (ids are 64 characters at most)', () => {
    const r = parseAssetMap(DEMO_MAP.replace('id: cw-pump-2', `id: ${'p'.repeat(100_000)}`), 'long.yaml');
    expect(r.map).toBeNull();
    expect(r.problems[0].message).toMatch(/assets\[0\]\.id: must be an id \(letters, digits, '\.', '_' or '-', at most 64 characters\), got 'p{80}\.\.\. \(99920 more characters\)'/);
  });
});
