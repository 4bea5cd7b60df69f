/**
 * Whole mono recording in memory, for tests that need every sample at once.
 * Reads through the product's WAV reader (src/acquisition/wav.ts) so tests exercise it too.
 */
import { readWavBlocks } from '../../src/acquisition/wav.ts';

export interface MonoRecording {
  sampleRateHz: number;
  samples: Float32Array;
}

export async function readFloatWav(path: string): Promise<MonoRecording> {
  const parts: Float32Array[] = [];
  let sampleRateHz = 0;
  let total = 0;
  for await (const block of readWavBlocks(path, 1 << 16)) {
    sampleRateHz = block.info.sampleRateHz;
    parts.push(block.channels[0]);
    total += block.channels[0].length;
  }
  const samples = new Float32Array(total);
  let at = 0;
  for (const p of parts) {
    samples.set(p, at);
    at += p.length;
  }
  return { sampleRateHz, samples };
}
