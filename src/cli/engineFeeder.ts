/**
 * Feeds recording blocks to the engine, with unusable samples (NaN from the readers) left out:
 * a clean block goes in whole; otherwise each bound channel goes in as its runs of usable
 * samples, so the engine sees missing data (a gap, when long enough) and never a bad number.
 * Counts the samples left out per channel.
 */
import type { RecordingBlock } from '../acquisition/wavFormat.ts';
import { usableRuns } from '../acquisition/usableRuns.ts';
import type { EngineRecord } from '../advisory/records.ts';
import type { AssetEngine } from '../engine/assetEngine.ts';

export class EngineFeeder {
  /** Samples left out, per channel. */
  readonly unusable = new Map<number, number>();

  constructor(private readonly engine: AssetEngine) {}

  push(block: RecordingBlock): EngineRecord[] {
    const fs = block.info.sampleRateHz;
    if (block.unusableSamples === 0) return this.engine.pushBlock(block.t0S, fs, block.channels);
    const out: EngineRecord[] = [];
    for (const channel of this.engine.boundChannels) {
      const samples = block.channels[channel];
      if (!samples || samples.length === 0) continue;
      let kept = 0;
      for (const [start, end] of usableRuns(samples)) {
        kept += end - start;
        out.push(...this.engine.pushChannel(channel, block.t0S + start / fs, fs, samples.subarray(start, end)));
      }
      if (kept < samples.length) this.unusable.set(channel, (this.unusable.get(channel) ?? 0) + samples.length - kept);
    }
    return out;
  }

  get unusableTotal(): number {
    let n = 0;
    for (const v of this.unusable.values()) n += v;
    return n;
  }
}
