/**
 * How many accelerometer channels one core keeps up with in real time.
 *
 * Per channel the engine's spectral work is: RollingSpectrum at 25.6 kHz, 8192-point frames,
 * 50 % overlap, 4 averages, no decimation, then an order search (interpolatePeak at 8 order
 * frequencies) on every frame. We push C channels of synthetic data (sines on shaft orders plus
 * noise, 0.1 s blocks) and count channel-seconds of data processed per second of CPU time
 * (process.cpuUsage: all threads, so garbage collection is charged). The same pipeline runs with
 * the pffft (WebAssembly) FFT and with the fft.js reference, in alternating rounds of the same
 * run so that both see the same machine; the table gives the median and the best round (the
 * machine is shared: the best round is the least disturbed one).
 *
 * Then a stage profile: the pipeline's steps replayed with the exported kernels over C channels'
 * worth of buffers (so caches are as cold as in the pipeline), each step timed.
 *
 * V8 state: loading any CommonJS package through tsx (fft.js, yaml, pino, mqtt...) invalidates
 * V8's ArrayBuffer-detaching protector, after which typed-array loops run slower. The agent
 * always runs in that state, so the bench puts itself in it explicitly before measuring.
 *
 * Last, the tachless speed path (TachlessTracker: one per asset whose speed source is
 * `spectrum`, on its speed sensor only), fed the same signal at 25.6 kHz: CPU per second of
 * data, and how many channels of the spectral pipeline that equals.
 *
 * Run: npm run bench. Takes about 15 s.
 */
import { spawn, spawnSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { dirname, join } from 'node:path';
import { createInterface } from 'node:readline';
import { fileURLToPath } from 'node:url';
import { hannWindow } from '../src/manipulation/hannWindow.ts';
import { createRealFft, type RealFftBackend } from '../src/manipulation/realFft.ts';
import { spectrumKernel } from '../src/manipulation/spectrumKernel.ts';
import { RollingSpectrum } from '../src/manipulation/rollingSpectrum.ts';
import { frameMean, removeMeanAndWindow, updateAverage } from '../src/manipulation/frameKernels.ts';
import { interpolatePeak } from '../src/manipulation/spectrumMath.ts';
import { TachlessTracker } from '../src/manipulation/tachlessTracker.ts';
import { FS_HZ, ORDERS, SHAFT_HZ, syntheticSignal } from './benchStream.ts';
import { benchArgs } from './benchArgs.ts';

// The agent's V8 state (see header): detach one buffer so the protector is invalid for certain.
{
  const b = new ArrayBuffer(8);
  structuredClone(b, { transfer: [b] });
}

const USAGE = `Usage: npm run bench

How many 25.6 kHz channels one core keeps up with in real time in the engine's spectral pipeline
(8192-point frames, 50 % overlap, 4 averages, an order search per frame), with the WebAssembly
FFT and with the fft.js reference in alternating rounds, against scipy.signal.welch on the same
frames where a Python with SciPy is found (the fastest, if several; else it says the peer was not
run); then a stage profile and the tachless speed path. Takes about 15 s. No options:
QBAND_PEER_PYTHON names one more interpreter to try.
`;
benchArgs({}, USAGE);

const FRAME = 8192;
const OVERLAP = 0.5;
const AVERAGES = 4;
const CHANNELS = 8;
const BLOCK = 2560; // 0.1 s
const SECONDS_PER_ROUND = 20; // of data per channel
const ROUNDS = 15;
const FRAMES_PER_CHANNEL_S = FS_HZ / (FRAME * (1 - OVERLAP)); // 6.25
const BACKENDS: RealFftBackend[] = ['pffft', 'fftjs'];

function cpuS(): number {
  const u = process.cpuUsage();
  return (u.user + u.system) / 1e6;
}

const median = (a: number[]): number => [...a].sort((x, y) => x - y)[Math.floor(a.length / 2)];

let sink = 0;

function orderSearch(amplitude: Float64Array, binHz: number): void {
  for (const order of ORDERS) {
    const hz = order * SHAFT_HZ;
    const p = interpolatePeak(amplitude, binHz, hz, Math.max(2 * binHz, 0.02 * hz));
    if (p) sink += p.amplitude;
  }
}

class Pipeline {
  private block = 0;
  private constructor(private readonly chans: RollingSpectrum[]) {}

  static async create(backend: RealFftBackend): Promise<Pipeline> {
    const chans: RollingSpectrum[] = [];
    for (let c = 0; c < CHANNELS; c++) {
      const fft = await createRealFft(FRAME, backend);
      chans.push(new RollingSpectrum({ inputRateHz: FS_HZ, frameSize: FRAME, overlap: OVERLAP, averages: AVERAGES, decimation: 1, fft }));
    }
    return new Pipeline(chans);
  }

  /** Pushes dataS seconds per channel; returns CPU seconds and frames. */
  run(signal: Float32Array, dataS: number): { cpu: number; frames: number } {
    const blocksInSignal = Math.floor(signal.length / BLOCK);
    const n = Math.round((dataS * FS_HZ) / BLOCK);
    let frames = 0;
    const c0 = cpuS();
    for (let i = 0; i < n; i++, this.block++) {
      for (let c = 0; c < CHANNELS; c++) {
        const at = ((this.block + 13 * c) % blocksInSignal) * BLOCK;
        for (const f of this.chans[c].push(signal.subarray(at, at + BLOCK), (this.block * BLOCK) / FS_HZ)) {
          frames++;
          orderSearch(f.amplitude, f.binHz);
        }
      }
    }
    return { cpu: cpuS() - c0, frames };
  }
}

const STAGES = [
  'slide + copy in',
  'mean + window, wasm',
  'FFT (pffft, copy in/out)',
  'power + average + sqrt, wasm',
  'copy amplitude out',
  'order search',
  '(JS) mean + window',
  '(JS) |X|^2 + average + sqrt',
] as const;
const JS_STAGES = 2;

/**
 * The pipeline's per-frame steps replayed over CHANNELS channels' buffers in the kernel's memory,
 * each step timed; the last two rows time the plain JavaScript kernels on the same buffers (what
 * the pipeline runs where WebAssembly SIMD is missing), for comparison, not in the sum.
 */
async function stageProfiler(signal: Float32Array): Promise<(frames: number) => number[]> {
  const k = spectrumKernel();
  if (k === null) throw new Error('the WebAssembly kernel did not load');
  const lines = FRAME / 2 + 1;
  const half = FRAME / 2;
  const win = hannWindow(FRAME);
  const fft = await createRealFft(FRAME, 'pffft');
  const winPtr = k.alloc(4 * FRAME);
  const windowedPtr = k.alloc(4 * FRAME);
  const orderedPtr = k.alloc(4 * FRAME);
  const ampPtr = k.alloc(8 * lines);
  const jsPower = new Float64Array(lines);
  const chans: { frame: number; sum: number; ring: number[]; amplitude: Float64Array; jsSum: Float64Array; jsRing: Float64Array[] }[] = [];
  for (let c = 0; c < CHANNELS; c++) {
    const frame = k.alloc(4 * FRAME);
    k.f32(frame, FRAME).set(signal.subarray(c * FRAME, (c + 1) * FRAME));
    const sum = k.alloc(8 * lines);
    k.f64(sum, lines).fill(0);
    const ring = Array.from({ length: AVERAGES }, () => k.alloc(8 * lines));
    for (const r of ring) k.f64(r, lines).fill(0);
    chans.push({ frame, sum, ring, amplitude: new Float64Array(lines), jsSum: new Float64Array(lines), jsRing: Array.from({ length: AVERAGES }, () => new Float64Array(lines)) });
  }
  k.f32(winPtr, FRAME).set(win.w);
  const hop = FRAME / 2;
  const binHz = FS_HZ / FRAME;
  const scale = 2 / (win.sum * win.sum);
  let count = 0;
  const profile = (frames: number): number[] => {
    const acc = new Array<number>(STAGES.length).fill(0);
    const windowed = k.f32(windowedPtr, FRAME);
    const ordered = k.f32(orderedPtr, FRAME);
    const amp = k.f64(ampPtr, lines);
    for (let f = 0; f < frames; f++, count++) {
      const ch = chans[count % CHANNELS];
      const slot = Math.floor(count / CHANNELS) % AVERAGES;
      const frame = k.f32(ch.frame, FRAME);
      const at = (count * hop) % (signal.length - hop);
      const t0 = performance.now();
      frame.copyWithin(0, hop, FRAME);
      frame.set(signal.subarray(at, at + hop), FRAME - hop);
      const t1 = performance.now();
      k.fn.meanWindow(ch.frame, winPtr, windowedPtr, FRAME);
      const t2 = performance.now();
      fft.orderedTransform?.(windowed, ordered);
      const t3 = performance.now();
      k.fn.powerAverage(orderedPtr, ch.sum, ch.ring[slot], ampPtr, scale / AVERAGES, half);
      const t4 = performance.now();
      ch.amplitude.set(amp);
      const t5 = performance.now();
      orderSearch(ch.amplitude, binHz);
      const t6 = performance.now();
      removeMeanAndWindow(frame, frameMean(frame), win.w, windowed);
      const t7 = performance.now();
      // The JavaScript path's |X|^2 from the ordered output, then its average.
      jsPower[0] = ordered[0] * ordered[0];
      jsPower[half] = ordered[1] * ordered[1];
      for (let j = 1; j < half; j++) jsPower[j] = ordered[2 * j] * ordered[2 * j] + ordered[2 * j + 1] * ordered[2 * j + 1];
      updateAverage(ch.jsSum, ch.jsRing[slot], jsPower, scale, 1 / AVERAGES, ch.amplitude);
      const t8 = performance.now();
      const t = [t0, t1, t2, t3, t4, t5, t6, t7, t8];
      for (let s = 0; s < STAGES.length; s++) acc[s] += t[s + 1] - t[s];
    }
    return acc.map((ms) => (ms / frames) * 1000);
  };
  profile(400); // warm-up
  return profile;
}

interface Peer {
  version: string;
  round(calls: number): Promise<number>;
  amplitude(): Promise<number[]>;
  close(): void;
}

/**
 * The Python peer at its best: every interpreter named (QBAND_PEER_PYTHON, Debian's
 * /usr/bin/python3, the first python3 on the PATH) that imports scipy is started and timed on a
 * few calls, and the fastest is kept (a slower SciPy would flatter the engine); or the reason
 * none was run. `tried` says what each candidate gave; `caution`, when Debian's is not among them.
 */
async function choosePeer(signal: Float32Array): Promise<{ peer: Peer; tried: string[]; caution?: string } | string> {
  const candidates = [...new Set([process.env.QBAND_PEER_PYTHON, '/usr/bin/python3', 'python3'].filter((c): c is string => !!c))];
  const usable = candidates.filter((c) => spawnSync(c, ['-c', 'import scipy.signal'], { stdio: 'ignore' }).status === 0);
  if (usable.length === 0) return `no python3 with scipy found (tried ${candidates.join(', ')}; Debian: apt-get install python3-scipy)`;
  const timed: Array<{ peer: Peer; us: number }> = [];
  for (const python of usable) {
    const peer = await startPeer(signal, python);
    await peer.round(20); // warm-up
    timed.push({ peer, us: Math.min(await peer.round(40), await peer.round(40)) });
  }
  timed.sort((a, b) => a.us - b.us);
  for (const t of timed.slice(1)) t.peer.close();
  const tried = timed.map((t) => `${t.peer.version}: ${t.us.toFixed(1)} us a frame`);
  // pip's SciPy 1.17.1 took 2 to 4 times as long a frame here as Debian's 1.10.1 (docs/benchmarks.md):
  // without Debian's, the ratio may flatter the engine, and the reader is told so.
  const caution = usable.includes('/usr/bin/python3') ? undefined : `Debian's /usr/bin/python3 has no scipy, so the peer is another SciPy; one from pip was measured 2 to 4 times slower a frame than Debian's on the development machine, which would flatter qband: apt-get install python3-scipy for the figure the README reports`;
  return { peer: timed[0].peer, tried, caution };
}

/** One Python peer (bench/welchPeer.py) on `python`. */
async function startPeer(signal: Float32Array, python: string): Promise<Peer> {
  const path = join(mkdtempSync(join(tmpdir(), 'qband-bench-')), 'signal.f32');
  writeFileSync(path, new Uint8Array(signal.buffer, signal.byteOffset, signal.byteLength));
  const child = spawn(python, [fileURLToPath(new URL('./welchPeer.py', import.meta.url)), path], {
    stdio: ['pipe', 'pipe', 'inherit'],
    // At its best: one thread, and glibc's mmap threshold raised so that fresh arrays reuse the
    // heap instead of page-faulting new mappings on every call.
    env: { ...process.env, OMP_NUM_THREADS: '1', OPENBLAS_NUM_THREADS: '1', MKL_NUM_THREADS: '1', MALLOC_MMAP_THRESHOLD_: String(1 << 30), MALLOC_TRIM_THRESHOLD_: String(1 << 30) },
  });
  const lines = createInterface({ input: child.stdout })[Symbol.asyncIterator]();
  const next = async (): Promise<string> => {
    const r = await lines.next();
    if (r.done) throw new Error('the Python peer stopped');
    return r.value;
  };
  const ver = JSON.parse(await next()) as { scipy: string; numpy: string };
  return {
    version: `${python}, scipy ${ver.scipy}, numpy ${ver.numpy}`,
    async round(calls) {
      child.stdin.write(`round ${calls}\n`);
      return Number(await next());
    },
    async amplitude() {
      child.stdin.write('amplitude\n');
      return JSON.parse(await next()) as number[];
    },
    close() {
      child.stdin.end();
      rmSync(dirname(path), { recursive: true, force: true });
    },
  };
}

const pad = (v: number, d = 0, w = 9): string => v.toFixed(d).padStart(w);

async function main(): Promise<void> {
  const t0 = performance.now();
  const signal = syntheticSignal(Math.round(10 * FS_HZ));
  console.log(
    `qband spectrum bench: ${FS_HZ} Hz, ${FRAME}-point frames, ${OVERLAP * 100} % overlap, ${AVERAGES} averages, no decimation,\n` +
      `${ORDERS.length}-order search per frame; ${CHANNELS} channels; ${ROUNDS} rounds of ${SECONDS_PER_ROUND} s of data per backend, alternating\n` +
      `with scipy.signal.welch on the same frames. One channel in real time = ${FRAMES_PER_CHANNEL_S} frames per second.\n` +
      `Per-frame kernels: ${spectrumKernel() ? 'WebAssembly SIMD (spectrumKernel.wat)' : 'plain JavaScript (WebAssembly SIMD did not load)'}.\n`,
  );

  const chosen = await choosePeer(signal);
  const peer = typeof chosen === 'string' ? chosen : chosen.peer;
  if (typeof chosen === 'string') console.log(`Python peer NOT run: ${chosen}\n`);
  else {
    console.log(`Python peer: ${chosen.peer.version}, one thread, MALLOC_MMAP_THRESHOLD_=${1 << 30}`);
    if (chosen.tried.length > 1) console.log(`  the fastest of: ${chosen.tried.join('; ')}`);
    if (chosen.caution) console.log(`  CAUTION: ${chosen.caution}`);
    console.log('');
  }

  const pipes = new Map<RealFftBackend, Pipeline>();
  for (const b of BACKENDS) {
    const p = await Pipeline.create(b);
    p.run(signal, 4); // warm-up: JIT, and the average ring fills
    pipes.set(b, p);
  }
  const profiler = await stageProfiler(signal);
  const peerCalls = Math.round((CHANNELS * SECONDS_PER_ROUND * FRAMES_PER_CHANNEL_S) / 4 / 4);
  if (typeof peer !== 'string') await peer.round(20); // warm-up
  const usPerFrame = new Map<RealFftBackend, number[]>(BACKENDS.map((b) => [b, []]));
  const stageUs: number[][] = STAGES.map(() => []);
  const peerUs: number[] = [];
  const ratios: number[] = [];
  for (let r = 0; r < ROUNDS; r++) {
    for (const b of BACKENDS) {
      const { cpu, frames } = (pipes.get(b) as Pipeline).run(signal, SECONDS_PER_ROUND);
      usPerFrame.get(b)?.push((cpu / frames) * 1e6);
      if (b === 'pffft') profiler(frames / 4).forEach((v, i) => stageUs[i].push(v));
    }
    if (typeof peer !== 'string') {
      peerUs.push(await peer.round(peerCalls));
      ratios.push((peerUs.at(-1) as number) / (usPerFrame.get('pffft')?.at(-1) as number));
    }
  }

  const channels = (us: number): number => 1e6 / us / FRAMES_PER_CHANNEL_S;
  const stageMedian = (s: number): number => median(stageUs[s]);
  console.log('channels in real time per core      median      best    us/frame (median)');
  const med = new Map<RealFftBackend, number>();
  for (const b of BACKENDS) {
    const u = usPerFrame.get(b) as number[];
    med.set(b, median(u));
    console.log(`  engine pipeline, ${b.padEnd(17)}${pad(channels(median(u)))} ${pad(channels(Math.min(...u)))} ${pad(median(u), 1, 12)}`);
  }
  if (peerUs.length > 0) console.log(`  scipy.signal.welch (float64)     ${pad(channels(median(peerUs)))} ${pad(channels(Math.min(...peerUs)))} ${pad(median(peerUs), 1, 12)}`);
  const fftUs = stageMedian(STAGES.indexOf('FFT (pffft, copy in/out)'));
  console.log(`  FFT alone, pffft                 ${pad(channels(fftUs))} ${' '.repeat(10)}${pad(fftUs, 1, 12)}`);
  console.log(`\npffft / fft.js pipeline: ${((med.get('fftjs') as number) / (med.get('pffft') as number)).toFixed(2)}x`);
  if (ratios.length > 0) {
    const ratio = median(ratios);
    console.log(
      `engine (pffft) / scipy.signal.welch, round by round: median ${ratio.toFixed(2)}x (min ${Math.min(...ratios).toFixed(2)}, max ${Math.max(...ratios).toFixed(2)}); ` +
        `target 2x: ${ratio >= 2 ? 'met' : 'NOT met'}${typeof chosen !== 'string' && chosen.caution ? " (against a peer that may be slow: see the caution above)" : ''}`,
    );
  }

  const prof = STAGES.map((_, i) => stageMedian(i));
  const total = prof.slice(0, STAGES.length - JS_STAGES).reduce((a, v) => a + v, 0);
  console.log('\nstage profile, pffft: us per frame (median of rounds), share of the profiled frame');
  console.log('  ((JS) rows: the plain JavaScript kernels on the same buffers, for comparison; not in the sum)');
  STAGES.forEach((st, i) =>
    console.log(`  ${st.padEnd(30)}${pad(prof[i], 1)}  ${i < STAGES.length - JS_STAGES ? `${pad((100 * prof[i]) / total, 1, 6)} %` : ''}`),
  );
  console.log(`  ${'sum of stages'.padEnd(30)}${pad(total, 1)}   (pipeline median ${(med.get('pffft') as number).toFixed(1)})`);

  if (typeof peer !== 'string') {
    // Precision: the engine's float32 path against scipy's float64 welch on the first four frames.
    const check = new RollingSpectrum({ inputRateHz: FS_HZ, frameSize: FRAME, overlap: OVERLAP, averages: AVERAGES, decimation: 1, fft: await createRealFft(FRAME, 'pffft') });
    const frames = check.push(signal.subarray(0, FRAME + 3 * (FRAME / 2)), 0);
    const ours = (frames.at(-1) as { amplitude: Float64Array }).amplitude;
    const ref = await peer.amplitude();
    let peak = 0;
    let worst = 0;
    let worstRel = 0;
    for (let kk = 0; kk < ref.length; kk++) peak = Math.max(peak, ref[kk]);
    for (let kk = 0; kk < ref.length; kk++) {
      const d = Math.abs(ours[kk] - ref[kk]);
      worst = Math.max(worst, d);
      if (ref[kk] > 1e-3 * peak) worstRel = Math.max(worstRel, d / ref[kk]);
    }
    console.log(
      `\nprecision against scipy's float64 welch (first four frames, ${ref.length} lines): largest difference ${(worst / peak).toExponential(1)} of the peak line; ` +
        `largest relative difference on lines above -60 dB of the peak ${worstRel.toExponential(1)} (tolerance 1e-4 of the peak, 1e-4 relative): ` +
        `${worst <= 1e-4 * peak && worstRel <= 1e-4 ? 'within' : 'NOT within'}`,
    );
    peer.close();
  }
  // The tachless speed path, on the same signal (1X at 24.7 Hz inside a 900..1800 rpm range).
  const trackerMsPerS: number[] = [];
  let points = 0;
  // On the engine's backend (pffft), as the engine builds it.
  const tracker = new TachlessTracker({ inputRateHz: FS_HZ, rangeRpm: [900, 1800], minConfidence: 0.6, fft: await createRealFft(64, 'pffft') });
  // One continuous stretch (5 s warm-up, then 5 rounds of 10 s): a looped 10 s signal would put
  // a phase jump in every orders' line each loop, which a real shaft never does and which
  // re-opens the tracker's slope search.
  const trackerSignal = syntheticSignal(Math.round(55 * FS_HZ));
  let block = 0;
  const feed = (dataS: number): number => {
    const c0 = cpuS();
    for (let i = 0; i < Math.round((dataS * FS_HZ) / BLOCK); i++, block++) {
      const at = block * BLOCK;
      for (const p of tracker.push(trackerSignal.subarray(at, at + BLOCK), at / FS_HZ)) if (p.rpm !== null) points++;
    }
    return cpuS() - c0;
  };
  feed(5); // warm-up
  for (let r = 0; r < 5; r++) trackerMsPerS.push((feed(10) / 10) * 1000);
  const channelCpuMsPerS = ((med.get('pffft') as number) * FRAMES_PER_CHANNEL_S) / 1000;
  const trackerMs = median(trackerMsPerS);
  console.log(
    `\ntachless speed path (one per tachless asset), 25.6 kHz in: ${trackerMs.toFixed(2)} ms CPU per s of data ` +
      `(${(trackerMs / 10).toFixed(2)} % of a core), the cost of ${(trackerMs / channelCpuMsPerS).toFixed(1)} pipeline channels (pffft); ${points} estimates`,
  );
  if (!Number.isFinite(sink)) throw new Error('non-finite result');
  console.log(`\nbench took ${((performance.now() - t0) / 1000).toFixed(1)} s`);
}

await main();
