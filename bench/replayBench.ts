/**
 * Replay speed: how many times real time `qband replay` runs a one-channel 25.6 kHz recording
 * on one core, with and without start-up.
 *
 * The recording: 240 s of the demo pump (config/demo-map.yaml) simulated at 25.6 kHz by
 * `qband simulate` through a speed profile like the demo's (hold, ramp into the motor reed band,
 * dwell there, ramps, coast-down), read without a tach (speed source `spectrum`, so the tachless
 * speed path runs) and with the tach (`--tach`: the map's own speed source). Transient capture
 * runs in both, as always.
 *
 * First `--warmup` runs in this process (default 5), each timed and printed: V8 compiles the hot
 * code in tiers and the heap grows over the first runs, so a run settles only after a few (the
 * first takes about five times a settled one). Then rounds alternate: (a) the replay command run
 * in this process through the CLI's `main`, output discarded: start-up excluded (the map, the
 * recording's header and the engine's set-up are inside the timing; Node, tsx, module loading and
 * compiling the hot code are not); (b) `node bin/qband.mjs replay` as a whole process, wall time,
 * output to /dev/null. Start-up is (b) - (a).
 * Last, a V8 CPU profile of one more in-process run split by file.
 *
 * Run: npm run bench:replay [-- --tach] [--seconds 240] [--warmup 5]. Takes about a minute.
 */
import { spawnSync } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { main } from '../src/cli/main.ts';
import { benchArgs, wholeNumber } from './benchArgs.ts';
import { startProfile } from './cpuProfile.ts';

const ROOT = fileURLToPath(new URL('..', import.meta.url));
const USAGE = `Usage: npm run bench:replay [-- options]

How many times real time \`qband replay\` runs a one-channel 25.6 kHz recording on one core,
with and without start-up: the recording is simulated first (the demo pump through a hold, a
ramp into the motor reed band, a dwell, ramps and a coast-down), then replayed in this process
(start-up excluded) and as a whole process, in alternating rounds. Takes about a minute.

Options:
  --tach            use the recording's tach (the map's own speed source); without it the speed
                    comes from the spectrum (tachless)
  --seconds <s>     length of the recording (default 240, at least 137)
  --warmup <n>      runs before the timed rounds, each printed (default 5)
  -h, --help        this text

Example: npm run bench:replay -- --tach
`;
const args = benchArgs({ tach: { type: 'boolean', default: false }, seconds: { type: 'string', default: '240' }, warmup: { type: 'string', default: '5' } }, USAGE);
const tach = args.tach;
const SECONDS = wholeNumber(args.seconds, 'seconds', 137, USAGE);
const ROUNDS = 5;
const WARMUP = wholeNumber(args.warmup, 'warmup', 1, USAGE);
const TARGET = 2000;

const median = (a: number[]): number => [...a].sort((x, y) => x - y)[Math.floor(a.length / 2)];
const cpuS = (): number => {
  const u = process.cpuUsage();
  return (u.user + u.system) / 1e6;
};

const dir = mkdtempSync(join(tmpdir(), 'qband-replay-bench-'));
try {
  let map = readFileSync(join(ROOT, 'config/demo-map.yaml'), 'utf8');
  if (!tach) {
    map = map.replace(/speed: \{ source: tach[^}]*\}/, 'speed: { source: spectrum, sensor: motor-top-x, range_rpm: [450, 1200] }');
  }
  writeFileSync(join(dir, 'map.yaml'), map);
  const holdS = Math.max(1, SECONDS - 136);
  writeFileSync(
    join(dir, 'profile.yaml'),
    [
      'asset: cw-pump-2',
      'sample_rate_hz: 25600',
      'start_rpm: 600',
      'segments:',
      '  - { hold_s: 10 }',
      '  - { ramp_to_rpm: 852, over_s: 20 }',
      '  - { hold_s: 60 }',
      '  - { ramp_to_rpm: 950, over_s: 10 }',
      '  - { ramp_to_rpm: 1100, over_s: 6 }',
      `  - { hold_s: ${holdS} }`,
      '  - { ramp_to_rpm: 450, over_s: 30 }',
      'forcing: { 1x: 0.02, 2x: 0.005, vane-pass: 0.01, motor-bpfo: { amplitude_g: 0.003, scaling: constant } }',
      'noise_g: 0.002',
      'seed: 7',
      '',
    ].join('\n'),
  );
  const sink = { write: () => true };
  const io = { stdout: sink, stderr: { write: (s: string) => process.stderr.write(s) }, cwd: dir };
  const wav = join(dir, 'rec.wav');
  if ((await main(['simulate', '--map', 'map.yaml', '--profile', 'profile.yaml', '-o', 'rec.wav'], io)) !== 0) throw new Error('simulate failed');
  const replayArgs = ['replay', '--map', join(dir, 'map.yaml'), wav];
  const dataS = SECONDS;
  console.log(
    `qband replay bench: one channel, 25.6 kHz, ${dataS} s of data, speed source ${tach ? 'tach' : 'spectrum (tachless)'}, transient capture on; ` +
      `${WARMUP} warm-up runs, then ${ROUNDS} rounds alternating in-process and whole-process runs.\n`,
  );

  const inProcess = async (): Promise<{ wall: number; cpu: number }> => {
    const w0 = performance.now();
    const c0 = cpuS();
    const code = await main(replayArgs, io);
    if (code !== 0) throw new Error(`replay exited ${code}`);
    return { wall: (performance.now() - w0) / 1000, cpu: cpuS() - c0 };
  };
  const wholeProcess = (): number => {
    const w0 = performance.now();
    const r = spawnSync(process.execPath, [join(ROOT, 'bin/qband.mjs'), ...replayArgs], { stdio: ['ignore', 'ignore', 'inherit'] });
    if (r.status !== 0) throw new Error(`qband replay exited ${r.status}`);
    return (performance.now() - w0) / 1000;
  };
  const warm: string[] = [];
  for (let r = 0; r < WARMUP; r++) {
    const w = await inProcess();
    warm.push(`${w.wall.toFixed(3)} (${Math.round(dataS / w.wall)}x)`);
  }
  console.log(`warm-up runs in this process, wall s: ${warm.join(', ')}\n`);
  const inWall: number[] = [];
  const inCpu: number[] = [];
  const whole: number[] = [];
  for (let r = 0; r < ROUNDS; r++) {
    const a = await inProcess();
    inWall.push(a.wall);
    inCpu.push(a.cpu);
    whole.push(wholeProcess());
  }
  const x = (s: number): string => `${Math.round(dataS / s)}x`;
  const wallIn = median(inWall);
  const wallWhole = median(whole);
  console.log('                                 median s   x real time   (min..max s)');
  console.log(`  start-up excluded, wall       ${wallIn.toFixed(3).padStart(9)}   ${x(wallIn).padStart(11)}   (${Math.min(...inWall).toFixed(3)}..${Math.max(...inWall).toFixed(3)})`);
  console.log(`  start-up excluded, CPU        ${median(inCpu).toFixed(3).padStart(9)}   ${x(median(inCpu)).padStart(11)}`);
  console.log(`  whole process, wall           ${wallWhole.toFixed(3).padStart(9)}   ${x(wallWhole).padStart(11)}   (${Math.min(...whole).toFixed(3)}..${Math.max(...whole).toFixed(3)})`);
  console.log(`  start-up (difference)         ${(wallWhole - wallIn).toFixed(3).padStart(9)}`);
  console.log(`\ntarget ${TARGET}x real time, start-up excluded (wall): ${dataS / wallIn >= TARGET ? 'met' : 'NOT met'}`);

  const stop = await startProfile();
  await inProcess();
  const shares = await stop();
  console.log('\nwhere an in-process run goes (V8 sampling profile, self time by function):');
  for (const f of shares.functions) console.log(`  ${(100 * f.share).toFixed(1).padStart(5)} %  ${f.name}`);
} finally {
  rmSync(dir, { recursive: true, force: true });
}
