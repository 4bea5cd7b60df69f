// Properties of every input surface (asset map, WAV, CSV recording, speed CSV, command line)
// over generated inputs, hostile values mixed in. The oracles are the promises of the bad-input
// review restated here: nothing throws except a QbandError with a registered code; every
// message is printable and short; every problem has a line and column; whatever is accepted
// is usable (a map check passes can be run, a sample handed on is a usable number); QB_E_USAGE
// iff exit 2. fast-check prints the shrunk input of any failure. Case counts are the numRuns.
import fc from 'fast-check';
import { mkdirSync, mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { readCsvBlocks } from '../src/acquisition/csvRecording.ts';
import { MAX_RECORDING_CHANNELS, MAX_SAMPLE_ABS, MAX_SAMPLE_RATE_HZ, MIN_SAMPLE_RATE_HZ } from '../src/acquisition/recordingLimits.ts';
import { parseSpeedCsv } from '../src/acquisition/speedCsv.ts';
import { readWavBlocks } from '../src/acquisition/wav.ts';
import { encodeWav } from '../src/acquisition/wavWriter.ts';
import type { RecordingBlock } from '../src/acquisition/wavFormat.ts';
import type { CliIo } from '../src/cli/io.ts';
import { main } from '../src/cli/main.ts';
import { parseAssetMap } from '../src/config/parseAssetMap.ts';
import { AssetEngine } from '../src/engine/assetEngine.ts';
import { ERROR_CODES, QbandError } from '../src/errors.ts';
import { createRealFft } from '../src/manipulation/realFft.ts';
import { isPrintable } from '../src/text/printable.ts';

const ROOT = resolve(new URL('..', import.meta.url).pathname);
const dir = mkdtempSync(join(tmpdir(), 'qband-prop-'));
const DEMO_MAP = readFileSync(join(ROOT, 'config/demo-map.yaml'), 'utf8');
let fileNo = 0;
function file(content: string | Buffer, ext: string): string {
  const p = join(dir, `p${fileNo++}${ext}`);
  writeFileSync(p, content);
  return p;
}

/** Values people and hostile files write: edge numbers, odd text, control and bidi characters. */
const HOSTILE_TEXT = [
  '',
  ' ',
  '0x10',
  'NaN',
  '.nan',
  '.inf',
  '-.inf',
  'Infinity',
  '1e39',
  '-1e400',
  '1e-320',
  '\u001b]0;title\u0007',
  'a\u0000b',
  '\u202eevil',
  '\u2066x\u2069',
  '\ud800',
  'é😀',
  'z'.repeat(3000),
  '"quoted"',
  "'single'",
  '[1, 2]',
  '{a: 1}',
  '&anchor x',
  '*alias',
  '!!binary AAAA',
  '- item',
  '#comment',
];
const EDGE_NUMBERS = [0, -1, 1, 2, 3, 0.5, 0.9, 0.99, 1e-9, 0.01, 60, 1e9, 1e308, 4194304, 65536, 131072, 100000, 1000, 1024, 5000, 32, 64, 4096, 8192];

const hostileScalar = fc.oneof(
  fc.constantFrom(...HOSTILE_TEXT),
  fc.constantFrom(...EDGE_NUMBERS).map(String),
  fc.double({ noNaN: false }).map(String),
  fc.string({ maxLength: 20 }),
  fc.string({ unit: 'binary', maxLength: 12 }),
);

/** Every message a user may see keeps these promises. */
function checkMessage(message: string): void {
  expect(isPrintable(message), `not printable: ${JSON.stringify(message)}`).toBe(true);
  expect(message.length, `too long: ${message.slice(0, 200)}`).toBeLessThan(2500);
}

function checkThrown(err: unknown, allowed: string[]): void {
  expect(err, `not a QbandError: ${String(err)}`).toBeInstanceOf(QbandError);
  expect(allowed).toContain((err as QbandError).code);
  for (const line of (err as QbandError).message.split('\n')) checkMessage(line);
}

describe('asset map: any text', () => {
  const lines = DEMO_MAP.split('\n');
  /** The demo map with some values replaced, lines duplicated or nesting added. */
  const mutatedMap = fc
    .array(
      fc.oneof(
        fc.record({ kind: fc.constant('value' as const), line: fc.nat({ max: lines.length - 1 }), value: hostileScalar }),
        fc.record({ kind: fc.constant('analysis' as const), key: fc.constantFrom('frame_size', 'overlap', 'averages', 'decimation', 'decision_step_s'), value: fc.constantFrom(...EDGE_NUMBERS, 'auto') }),
        fc.record({ kind: fc.constant('agent' as const), key: fc.constantFrom('state_every_s', 'reorder_window', 'max_samples_per_block', 'max_past_s'), value: fc.constantFrom(...EDGE_NUMBERS) }),
        fc.record({ kind: fc.constant('duplicate' as const), line: fc.nat({ max: lines.length - 1 }) }),
        fc.record({ kind: fc.constant('nest' as const), depth: fc.integer({ min: 1, max: 200 }) }),
      ),
      { maxLength: 4 },
    )
    .map((edits) => {
      const out = [...lines];
      const analysis: string[] = [];
      const agent: string[] = [];
      for (const e of edits) {
        if (e.kind === 'value') out[e.line] = out[e.line].replace(/:\s*[^{[\s][^,}\]]*/, `: ${e.value}`);
        else if (e.kind === 'analysis') analysis.push(`${e.key}: ${e.value}`);
        else if (e.kind === 'agent') agent.push(`${e.key}: ${e.value}`);
        else if (e.kind === 'duplicate') out.splice(e.line, 0, out[e.line]);
        else out.push(`extra: ${'['.repeat(e.depth)}${']'.repeat(e.depth)}`);
      }
      let text = out.join('\n');
      if (analysis.length) text = text.replace('    alarm: {', `    analysis: { ${analysis.join(', ')} }\n    alarm: {`);
      if (agent.length) text = text.replace('site: north-basin', `site: north-basin\nagent: { ${agent.join(', ')} }`);
      return text;
    });

  it('problems are located, printable and capped; an accepted map builds engines that run', async () => {
    let accepted = 0;
    await fc.assert(
      fc.asyncProperty(fc.oneof({ weight: 4, arbitrary: mutatedMap }, { weight: 1, arbitrary: fc.string({ unit: 'binary', maxLength: 400 }) }), async (text) => {
        const r = parseAssetMap(text, 'gen.yaml');
        expect(r.problems.length).toBeLessThanOrEqual(100);
        for (const p of [...r.problems, ...r.warnings]) {
          expect(Object.keys(ERROR_CODES)).toContain(p.code);
          expect(p.line >= 1 && p.col >= 1, p.message).toBe(true);
          checkMessage(p.message);
        }
        if (!r.map) {
          expect(r.problems.length + r.moreProblems).toBeGreaterThan(0);
          return;
        }
        // check accepted it: the engine must accept it too, and run a second of data.
        accepted++;
        for (const asset of r.map.assets) {
          const engine = new AssetEngine(asset, { fft: await createRealFft(asset.analysis.frameSize, 'fftjs') });
          const fs = 2560;
          const block = Float32Array.from({ length: fs }, (_, i) => Math.sin(i / 10));
          const channels: Float32Array[] = [];
          for (const c of engine.boundChannels) channels[c] = block;
          engine.pushBlock(0, fs, channels);
          engine.summary();
        }
      }),
      { numRuns: 250 },
    );
    // The generator must reach accepted maps, or the second half says nothing.
    expect(accepted).toBeGreaterThan(10);
  }, 60_000);
});

/** Reads a whole recording, checking every block; rethrows what the reader throws. */
async function drain(blocks: AsyncGenerator<RecordingBlock>, selected: number[] | undefined): Promise<void> {
  for await (const b of blocks) {
    expect(b.info.sampleRateHz >= MIN_SAMPLE_RATE_HZ && b.info.sampleRateHz <= MAX_SAMPLE_RATE_HZ, `rate ${b.info.sampleRateHz}`).toBe(true);
    expect(b.info.channels).toBeLessThanOrEqual(MAX_RECORDING_CHANNELS);
    let nan = 0;
    b.channels.forEach((ch, c) => {
      if (selected && !selected.includes(c)) expect(ch.length).toBe(0);
      for (const x of ch) {
        if (Number.isNaN(x)) nan++;
        else expect(Math.abs(x) <= MAX_SAMPLE_ABS, `sample ${x}`).toBe(true);
      }
    });
    expect(nan).toBe(b.unusableSamples);
  }
}

describe('WAV: any bytes near a valid file', () => {
  const wavBytes = fc
    .record({
      channels: fc.integer({ min: 1, max: 4 }),
      frames: fc.integer({ min: 0, max: 300 }),
      format: fc.constantFrom('pcm16', 'pcm24', 'pcm32', 'float32' as const),
      rate: fc.constantFrom(1, 100, 2560, 48000, 1_000_000),
      samples: fc.array(fc.oneof(fc.float({ min: -1, max: 1 }), fc.constantFrom(Number.NaN, Infinity, -Infinity, 3e30, 1e6, -1e6 - 1)), { minLength: 1, maxLength: 16 }),
      patches: fc.array(fc.record({ at: fc.nat({ max: 120 }), byte: fc.nat({ max: 255 }) }), { maxLength: 6 }),
      cut: fc.option(fc.nat({ max: 2000 })),
      junkChunks: fc.nat({ max: 3 }),
    })
    .map((g) => {
      const chans = Array.from({ length: g.channels }, (_, c) => Float32Array.from({ length: g.frames }, (_, i) => g.samples[(i + c) % g.samples.length]));
      let bytes = encodeWav(chans, g.rate, g.format);
      if (g.junkChunks > 0) {
        const junk = Buffer.alloc(9 * g.junkChunks + 1);
        for (let i = 0; i < g.junkChunks; i++) junk.write('LIST', 9 * i, 'latin1');
        bytes = Buffer.concat([bytes.subarray(0, 12), junk, bytes.subarray(12)]);
      }
      for (const p of g.patches) if (p.at < bytes.length) bytes[p.at] = p.byte;
      return g.cut === null ? bytes : bytes.subarray(0, g.cut);
    });

  it('is read, or refused with QB_E_WAV_FORMAT; what is read is usable or marked NaN and counted', async () => {
    let read = 0;
    await fc.assert(
      fc.asyncProperty(wavBytes, fc.option(fc.array(fc.integer({ min: -1, max: 6 }), { maxLength: 3 })), async (bytes, selected) => {
        const path = file(bytes, '.wav');
        try {
          await drain(readWavBlocks(path, 64, selected ?? undefined), selected?.filter((c) => c >= 0) ?? undefined);
          read++;
        } catch (err) {
          checkThrown(err, ['QB_E_WAV_FORMAT']);
        }
      }),
      { numRuns: 300 },
    );
    expect(read).toBeGreaterThan(10);
  }, 60_000);
});

describe('CSV recording: any cells', () => {
  const cell = fc.oneof({ weight: 8, arbitrary: fc.double({ min: -10, max: 10, noNaN: true }).map(String) }, { weight: 1, arbitrary: hostileScalar });
  const csvText = fc
    .record({
      header: fc.oneof({ weight: 6, arbitrary: fc.constant('time_s,a,b') }, fc.constant('time_s,a,a'), fc.constant('t,a,b'), hostileScalar.map((h) => `time_s,${h},b`)),
      rateHz: fc.constantFrom(1e-12, 0.5, 1, 1000, 1e6, 1e12),
      rows: fc.array(fc.tuple(cell, cell), { minLength: 2, maxLength: 40 }),
      skip: fc.option(fc.nat({ max: 39 })),
    })
    .map((g) =>
      // A skipped row leaves a hole in the time column (refused as not uniform).
      [g.header, ...g.rows.map(([a, b], i) => `${i / g.rateHz},${a},${b}`).filter((_, i) => i !== g.skip)].join('\n'),
    );

  it('is read, or refused with QB_E_CSV_FORMAT naming its line', async () => {
    let read = 0;
    await fc.assert(
      fc.asyncProperty(csvText, async (text) => {
        const path = file(text, '.csv');
        try {
          await drain(readCsvBlocks(path, 16), undefined);
          read++;
        } catch (err) {
          checkThrown(err, ['QB_E_CSV_FORMAT']);
          expect((err as QbandError).message).toMatch(/\.csv(:\d+)?: /);
        }
      }),
      { numRuns: 300 },
    );
    expect(read).toBeGreaterThan(10);
  }, 60_000);
});

describe('speed CSV: any text', () => {
  const speedText = fc
    .array(
      fc.oneof(
        fc.tuple(fc.double({ min: -1e3, max: 1e3, noNaN: true }), fc.double({ min: -10, max: 2e6, noNaN: true })).map(([t, r]) => `${t},${r}`),
        fc.tuple(hostileScalar, hostileScalar).map(([t, r]) => `${t},${r}`),
        hostileScalar,
      ),
      { maxLength: 300 },
    )
    .chain((rows) => fc.constantFrom('time_s,rpm', 'rpm,time_s', 'time,rpm', '').map((h) => [h, ...rows].join('\n')));

  it('never throws; problems are capped, located and printable; points are usable', () => {
    fc.assert(
      fc.property(speedText, (text) => {
        const r = parseSpeedCsv(text, 'gen.csv');
        expect(r.problems.length).toBeLessThanOrEqual(100);
        const lineCount = text.split(/\r\n|\n|\r/).length;
        for (const p of r.problems) {
          expect(p.line >= 1 && p.line <= lineCount, `line ${p.line}`).toBe(true);
          checkMessage(p.message);
        }
        for (let i = 0; i < r.points.length; i++) {
          const p = r.points[i];
          expect(Number.isFinite(p.tS) && p.rpm >= 0 && p.rpm <= 1e6).toBe(true);
          if (i > 0) expect(p.tS).toBeGreaterThan(r.points[i - 1].tS);
        }
      }),
      { numRuns: 800 },
    );
  });
});

describe('command line: any arguments', () => {
  // Inputs that end every command early: nothing here is a valid map, so no replay, simulation
  // or agent runs (demo, which needs no input, is left out; its options are tested by name).
  const badMap = file('site: x\nassets: 1\n', '.yaml');
  const folder = join(dir, 'folder');
  mkdirSync(folder);
  const tokens = fc.oneof(
    fc.constantFrom('--map', '--asset', '--speed', '--status-every', '--format', '--fft', '--block', '--profile', '-o', '--output', '--json', '--broker', '--mqtt-version', '--log-level', '--no-state', '--cert', '-h', '-', '--', '-x', '--map=', '--status-every=-1', '--block=0x10'),
    fc.constantFrom(badMap, folder, join(dir, 'missing.yaml'), join(ROOT, 'demo/north-basin-runup.wav'), 'x.flac', 'json', 'text', '10', '-1', '0x10', ''),
    hostileScalar,
  );

  it('exits 0, 1 or 2, never throws; QB_E_USAGE iff 2; no stack trace; printable', async () => {
    await fc.assert(
      fc.asyncProperty(fc.constantFrom('check', 'replay', 'simulate', 'run', 'help', 'x\u001b'), fc.array(tokens, { maxLength: 6 }), async (command, args) => {
        let out = '';
        let err = '';
        const io: CliIo = { stdout: { write: (s: string) => (out += s) }, stderr: { write: (s: string) => (err += s), isTTY: false }, cwd: dir };
        const argv = command === 'run' ? [command, '--no-state', '--no-watch', '--log-level', 'error', ...args] : [command, ...args];
        const code = await main(argv, io);
        expect([0, 1, 2]).toContain(code);
        expect(err.includes('[QB_E_USAGE]'), `exit ${code}: ${err}`).toBe(code === 2);
        expect(err).not.toMatch(/^\s+at .+[(:]\d+/m);
        expect(err).not.toMatch(/QB_E_INTERNAL/);
        checkMessage(err.slice(0, 2000));
        expect(isPrintable(err), err).toBe(true);
        if (code === 0) expect(out).toMatch(/Usage|qband/);
      }),
      { numRuns: 300 },
    );
  }, 120_000);
});
