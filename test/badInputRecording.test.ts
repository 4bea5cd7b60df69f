// Bad recordings (WAV, CSV) and their command-line options, as a careless recorder or a
// hostile file would give them: a clear message with its code, never a hang or a blow-up.
// One `describe` per finding of the bad-input review (numbered as there).
import { describe, expect, it } from 'vitest';
import { readWavBlocks } from '../src/acquisition/wav.ts';
import { encodeWav } from '../src/acquisition/wavWriter.ts';
import { parseAssetMap } from '../src/config/parseAssetMap.ts';
import { DEMO_MAP, csvRecording, file, mapWith, run } from './support/badInputRig.ts';

describe('3. a CSV recording whose time column implies an absurd sample rate', () => {
  it('two rows 1e12 s apart (1e-12 Hz) are refused, naming the rate, instead of spinning', async () => {
    const csv = file('time_s,acc,tach\n0,0,0\n1e12,0,0\n', '.csv');
    const r = await run('replay', '--map', 'config/demo-map.yaml', csv);
    expect(r.code).toBe(1);
    expect(r.err).toMatch(/sample rate 1e-12 Hz is outside the 1 Hz to 1000000 Hz qband reads \[QB_E_CSV_FORMAT\]/);
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
    expect(r.err).toMatch(/half the sample rate \(0\.5 Hz\) is below the severity band \(10-1000 Hz\): no severity can be measured \[QB_E_RECORDING_RATE\]/);
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
