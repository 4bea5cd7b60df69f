/**
 * Opens a recording by its file name: `.wav` through the RIFF/WAVE reader, `.csv` through the
 * CSV reader. Both stream the same RecordingBlock shape.
 */
import { extname } from 'node:path';
import { QbandError } from '../errors.ts';
import { printable, quote } from '../text/printable.ts';
import { readCsvBlocks, readCsvInfo } from './csvRecording.ts';
import { readWavBlocks, readWavInfo, type RecordingBlock, type RecordingInfo } from './wav.ts';

export type { RecordingBlock, RecordingInfo } from './wav.ts';

type RecordingKind = 'wav' | 'csv';

function kindOf(path: string): RecordingKind {
  const ext = extname(path).toLowerCase();
  if (ext === '.wav' || ext === '.wave') return 'wav';
  if (ext === '.csv') return 'csv';
  throw new QbandError(
    'QB_E_RECORDING_TYPE',
    `${printable(path, 200)}: extension ${quote(ext)} is not a recording type qband reads; expected .wav or .csv`,
  );
}

/**
 * Streams the recording at `path` in blocks of `framesPerBlock` frames, decoding only the
 * channels in `selected` (all when absent). `reuseArrays`: see readWavBlocks (WAV only).
 */
export function openRecording(path: string, framesPerBlock: number, selected?: readonly number[], reuseArrays = false): AsyncGenerator<RecordingBlock> {
  return kindOf(path) === 'wav' ? readWavBlocks(path, framesPerBlock, selected, reuseArrays) : readCsvBlocks(path, framesPerBlock, selected);
}

/** Sample rate, channel count and total frames, e.g. for a progress bar. */
export async function readRecordingInfo(path: string): Promise<RecordingInfo> {
  if (kindOf(path) === 'wav') return readWavInfo(path);
  const { sampleRateHz, channels, frames, format } = await readCsvInfo(path);
  return { sampleRateHz, channels, frames, format };
}
