/**
 * Synthesises a recording of an asset running through a speed profile, block by block.
 *
 * Per sample n (t = n / fs), in double precision:
 *   speed    rpm(t) piecewise linear from the profile; shaft revolutions rev(t) its exact
 *            integral (speedSchedule.ts), so every order stays phase-continuous through ramps.
 *   forcing  f_k(t) = A_k s(t) sin(2 pi m_k rev(t) + phi_k) for each order k with forcing, where
 *            A_k is the profile's amplitude (g) at the run's top speed, s = (rpm/top)^2 for
 *            'speed-squared' (unbalance-like) or 1 for 'constant', m_k the order's multiple and
 *            phi_k a seeded random phase.
 *   resonance each component c filters x_c = sum of f_k over its orderIds through its SDOF
 *            resonator H_c (sdofResonator.ts: gain 1 well below fn, Q at fn, falling above).
 *   sensor   direct path + what each component adds to it:
 *              a = sum_k f_k + sum_{c seen by the sensor} (H_c x_c - x_c) + noise
 *            Normalisation: an order far below every fn reads at its forcing amplitude; an order
 *            at a component's fn (and exciting only that one) reads Q times it, since
 *            |H_c(fn)| = 1/(2 zeta) = Q. Above fn the response falls as the SDOF does.
 *            noise: white Gaussian, RMS noise_g, independent per sensor, from the seeded
 *            generator. All sensors see the same structure (no mode shapes are modelled);
 *            a component adds only to the sensors in its sensorIds.
 *   output   value in the sensor's units (g, or m/s^2 = g x 9.80665), raw = value / scale,
 *            in the sensor's channel; with a tach speed source, pulsesPerRev pulses per
 *            revolution in the tach channel: tachHighV for a short time after each mark
 *            (1 ms, or a quarter of the pulse interval at top speed if shorter; at least one
 *            sample), 0 otherwise. Channels that nothing uses stay 0.
 */
import type { AssetConfig } from '../config/types.ts';
import { QbandError } from '../errors.ts';
import { SeededRandom } from './prng.ts';
import { checkProfileAgainstAsset, type Profile } from './profile.ts';
import { SdofResonator } from './sdofResonator.ts';
import { revolutionsAt, rpmAt, segmentIndex, speedSchedule } from './speedSchedule.ts';

/** Standard acceleration of gravity, m/s^2 per g (exact by definition, CGPM 1901). */
export const STANDARD_GRAVITY_M_S2 = 9.80665;

export interface SynthesisOptions {
  /** Frames per yielded block (default 4096). */
  framesPerBlock?: number;
  /** High level of the tach pulses (default 5, as from a 5 V probe). */
  tachHighV?: number;
}

export interface SynthesisBlock {
  startFrame: number;
  /** startFrame / sampleRateHz. */
  t0S: number;
  channels: Float32Array[];
}

export interface SynthesisLayout {
  sampleRateHz: number;
  frames: number;
  durationS: number;
  /** What each output channel holds, e.g. `motor-top-x (g)`, `tach (1 pulse/rev)`, `unused`. */
  channelNames: string[];
}

/** Longest tach pulse (s). */
const TACH_PULSE_S = 0.001;

/** Output frames, duration and what each channel carries, without synthesising anything. */
export function synthesisLayout(asset: AssetConfig, profile: Profile): SynthesisLayout {
  const durationS = speedSchedule(profile).durationS;
  const frames = Math.round(durationS * profile.sampleRateHz);
  const tachChannel = asset.speed.source === 'tach' ? asset.speed.channel : undefined;
  const count = Math.max(tachChannel ?? -1, ...asset.sensors.map((s) => s.channel)) + 1;
  const channelNames: string[] = Array.from({ length: count }, () => 'unused');
  for (const s of asset.sensors) {
    if (channelNames[s.channel] !== 'unused') throw new RangeError(`channel ${s.channel} is bound twice (${channelNames[s.channel]}, ${s.id})`);
    channelNames[s.channel] = `${s.id} (${s.units}${s.scale !== 1 ? ` / ${s.scale}` : ''})`;
  }
  if (tachChannel !== undefined) {
    if (channelNames[tachChannel] !== 'unused') throw new RangeError(`channel ${tachChannel} is bound twice (${channelNames[tachChannel]}, tach)`);
    channelNames[tachChannel] = `tach (${asset.speed.pulsesPerRev} pulse/rev)`;
  }
  return { sampleRateHz: profile.sampleRateHz, frames, durationS: frames / profile.sampleRateHz, channelNames };
}

export function* synthesize(asset: AssetConfig, profile: Profile, options: SynthesisOptions = {}): Generator<SynthesisBlock> {
  const problems = checkProfileAgainstAsset(profile, asset);
  if (problems.length > 0) throw new QbandError('QB_E_PROFILE_ASSET', problems.map((p) => p.message).join('\n'));
  const framesPerBlock = options.framesPerBlock ?? 4096;
  if (!Number.isInteger(framesPerBlock) || framesPerBlock < 1) throw new RangeError(`framesPerBlock must be a positive integer, got ${framesPerBlock}`);
  const tachHighV = options.tachHighV ?? 5;
  const layout = synthesisLayout(asset, profile);
  const fs = profile.sampleRateHz;
  const schedule = speedSchedule(profile);
  const rng = new SeededRandom(profile.seed);

  // Orders with forcing, as flat arrays for the sample loop.
  const forced = profile.forcing.filter((f) => f.amplitudeG > 0);
  const orderIndex = new Map(forced.map((f, k) => [f.orderId, k]));
  const amplitudeG = Float64Array.from(forced, (f) => f.amplitudeG);
  const squared = forced.map((f) => f.scaling === 'speed-squared');
  const multiple = Float64Array.from(forced, (f) => asset.orders.find((o) => o.id === f.orderId)!.multiple);
  const phaseRev = Float64Array.from(forced, () => rng.uniform());
  const forcing = new Float64Array(forced.length);

  const components = asset.components.map((c) => ({
    resonator: new SdofResonator(c.fnHz, c.zeta, fs),
    orders: Int32Array.from(c.orderIds.flatMap((id) => (orderIndex.has(id) ? [orderIndex.get(id)!] : []))),
  }));
  const added = new Float64Array(components.length);
  const sensors = asset.sensors.map((s) => ({
    channel: s.channel,
    gain: (s.units === 'm/s^2' ? STANDARD_GRAVITY_M_S2 : 1) / s.scale,
    components: Int32Array.from(asset.components.flatMap((c, i) => (c.sensorIds.includes(s.id) ? [i] : []))),
  }));

  const tachChannel = asset.speed.source === 'tach' ? asset.speed.channel : undefined;
  const pulsesPerRev = asset.speed.pulsesPerRev;
  const topPulseHz = (pulsesPerRev * schedule.topRpm) / 60;
  const pulseSamples = Math.max(1, Math.round(fs * Math.min(TACH_PULSE_S, topPulseHz > 0 ? 0.25 / topPulseHz : TACH_PULSE_S)));
  let lastMark = 0;
  let highLeft = 0;

  const topRpm = schedule.topRpm;
  let segment = 0;
  for (let start = 0; start < layout.frames; start += framesPerBlock) {
    const n = Math.min(framesPerBlock, layout.frames - start);
    const channels = layout.channelNames.map(() => new Float32Array(n));
    for (let i = 0; i < n; i++) {
      const tS = (start + i) / fs;
      segment = segmentIndex(schedule, tS, segment);
      const rpm = rpmAt(schedule, tS, segment);
      const revs = revolutionsAt(schedule, tS, segment);
      const speedSquared = topRpm > 0 ? (rpm / topRpm) ** 2 : 0;

      let direct = 0;
      for (let k = 0; k < forcing.length; k++) {
        // Reduce to one cycle before the sine: m * rev grows to 1e4 and more in a long run.
        const cycles = multiple[k] * revs + phaseRev[k];
        const f = amplitudeG[k] * (squared[k] ? speedSquared : 1) * Math.sin(2 * Math.PI * (cycles - Math.floor(cycles)));
        forcing[k] = f;
        direct += f;
      }
      for (let c = 0; c < components.length; c++) {
        const orders = components[c].orders;
        let x = 0;
        for (let j = 0; j < orders.length; j++) x += forcing[orders[j]];
        added[c] = components[c].resonator.step(x) - x;
      }
      for (const s of sensors) {
        let a = direct;
        for (let j = 0; j < s.components.length; j++) a += added[s.components[j]];
        if (profile.noiseG > 0) a += profile.noiseG * rng.normal();
        channels[s.channel][i] = a * s.gain;
      }
      if (tachChannel !== undefined) {
        const mark = Math.floor(pulsesPerRev * revs);
        if (mark > lastMark) {
          lastMark = mark;
          highLeft = pulseSamples;
        }
        if (highLeft > 0) {
          channels[tachChannel][i] = tachHighV;
          highLeft--;
        }
      }
    }
    yield { startFrame: start, t0S: start / fs, channels };
  }
}
