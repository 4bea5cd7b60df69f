/**
 * CSV recordings: a header `time_s,<name>,<name>...` and one row per sample frame. Channels are
 * numbered 0.. in column order after `time_s`; values are taken as they are (no scaling).
 *
 * The sample rate comes from the time column: fs = (rows - 1) / (t_last - t_first). The column
 * must be uniform: every step t[i] - t[i-1] must lie within TIME_STEP_TOLERANCE (a quarter) of the
 * mean step 1/fs. A dropped or repeated row moves a step by a whole period and fails; rounding of
 * printed times (e.g. 6 decimals at 48 kHz, about 2.4 % of a step) passes.
 *
 * A file is read twice, streaming both times: once to count rows and check the time column (so
 * the rate is known before the first block and errors come before any data), once for the blocks.
 * The time origin is not kept: block times count from the first row, like a WAV file.
 *
 * Cells are plain decimals (parseDecimal: no hex, no 'NaN'); anything else is a format error.
 * A sample that is a number but not usable (beyond MAX_SAMPLE_ABS, or beyond float32 like 1e39)
 * is missing data: NaN in its block, and counted.
 */
import { createReadStream } from 'node:fs';
import { createInterface } from 'node:readline';
import { QbandError } from '../errors.ts';
import { printable, quote } from '../text/printable.ts';
import { parseDecimal } from '../text/parseDecimal.ts';
import { checkChannelCount, checkSampleRate, isUsableSample } from './recordingLimits.ts';
import type { RecordingBlock, RecordingInfo } from './wavFormat.ts';

/** Allowed deviation of one time step from the mean step, as a fraction of the mean step. */
export const TIME_STEP_TOLERANCE = 0.25;

export interface CsvRecordingInfo extends RecordingInfo {
  /** Column names after time_s, in channel order. */
  channelNames: string[];
}

function csvError(path: string, line: number, what: string): QbandError {
  return new QbandError('QB_E_CSV_FORMAT', `${printable(path, 200)}:${line}: ${what}`);
}

/** Lines of a file, streaming; the file is closed when the loop ends, breaks or throws. */
async function* lines(path: string): AsyncGenerator<string> {
  const stream = createReadStream(path, { encoding: 'utf8' });
  const reader = createInterface({ input: stream, crlfDelay: Infinity });
  try {
    yield* reader;
  } finally {
    reader.close();
    stream.destroy();
  }
}

function parseHeader(path: string, text: string | undefined): string[] {
  if (text === undefined) throw csvError(path, 1, 'file is empty; expected a header `time_s,<channel>,...`');
  const cells = text.replace(/^\uFEFF/, '').split(',').map((c) => c.trim());
  if (cells[0] !== 'time_s') throw csvError(path, 1, `first column is ${quote(cells[0])}, expected 'time_s'`);
  const names = cells.slice(1);
  if (names.length === 0) throw csvError(path, 1, 'header has no channel columns after time_s');
  checkChannelCount(names.length, `${printable(path, 200)}:1`, 'QB_E_CSV_FORMAT');
  const seen = new Set<string>();
  names.forEach((n, i) => {
    if (n === '') throw csvError(path, 1, `column ${i + 2} has an empty name`);
    if (seen.has(n)) throw csvError(path, 1, `column name ${quote(n)} appears twice`);
    seen.add(n);
  });
  return names;
}

/**
 * Parses one data row into `row` (time first); throws with the line number on any cell that is
 * not a number, or a time that is not finite. A sample that is not usable is stored as NaN;
 * returns how many were.
 */
function parseRow(path: string, lineNo: number, text: string, row: Float64Array, names: string[]): number {
  const cells = text.split(',');
  if (cells.length !== row.length) {
    throw csvError(path, lineNo, `has ${cells.length} columns, the header has ${row.length}`);
  }
  let unusable = 0;
  for (let i = 0; i < cells.length; i++) {
    const v = parseDecimal(cells[i]);
    if (Number.isNaN(v) || (i === 0 && !Number.isFinite(v))) {
      const col = i === 0 ? 'time_s' : names[i - 1];
      throw csvError(path, lineNo, `column ${quote(col)} holds ${quote(cells[i].trim())}, expected a finite decimal number`);
    }
    // Float32 is what the samples become: a value beyond its range would be Infinity there.
    if (i > 0 && !isUsableSample(Math.fround(v))) {
      row[i] = Number.NaN;
      unusable++;
    } else row[i] = v;
  }
  return unusable;
}

/** First pass: header, row count and the uniformity of the time column. */
export async function readCsvInfo(path: string): Promise<CsvRecordingInfo> {
  let names: string[] | undefined;
  let row = new Float64Array(0);
  let lineNo = 0;
  let frames = 0;
  let tFirst = 0;
  let tPrev = 0;
  let minStepS = Infinity;
  let maxStepS = -Infinity;
  let minStepLine = 0;
  let maxStepLine = 0;
  try {
    for await (const text of lines(path)) {
      lineNo++;
      if (names === undefined) {
        names = parseHeader(path, text);
        row = new Float64Array(names.length + 1);
        continue;
      }
      if (text.trim() === '') continue;
      parseRow(path, lineNo, text, row, names);
      const t = row[0];
      if (frames === 0) tFirst = t;
      else {
        const step = t - tPrev;
        if (!(step > 0)) throw csvError(path, lineNo, `time_s ${t} does not increase (previous row ${tPrev})`);
        if (step < minStepS) [minStepS, minStepLine] = [step, lineNo];
        if (step > maxStepS) [maxStepS, maxStepLine] = [step, lineNo];
      }
      tPrev = t;
      frames++;
    }
  } catch (err) {
    if (err instanceof QbandError) throw err;
    const errno = (err as NodeJS.ErrnoException).code ?? (err as Error).message;
    throw new QbandError('QB_E_FILE_READ', `${printable(path, 200)}: cannot read (${errno})`, { cause: err });
  }
  names ??= parseHeader(path, undefined);
  if (frames < 2) throw csvError(path, lineNo, `has ${frames} data row(s); at least 2 are needed to know the sample rate`);
  const meanStepS = (tPrev - tFirst) / (frames - 1);
  for (const [step, at] of [
    [minStepS, minStepLine],
    [maxStepS, maxStepLine],
  ] as const) {
    if (Math.abs(step - meanStepS) > TIME_STEP_TOLERANCE * meanStepS) {
      throw csvError(
        path,
        at,
        `time step ${step} s differs from the mean step ${meanStepS} s by more than ${TIME_STEP_TOLERANCE * 100} %: the time column must be uniform (a missing or repeated row?)`,
      );
    }
  }
  const sampleRateHz = 1 / meanStepS;
  checkSampleRate(sampleRateHz, `${printable(path, 200)}: the time column`, 'QB_E_CSV_FORMAT');
  return { sampleRateHz, channels: names.length, frames, format: 'csv', channelNames: names };
}

/**
 * Streams a CSV recording as blocks of `framesPerBlock` frames (the last may be shorter). Only
 * the channels in `selected` (all when absent) are kept; the others are empty arrays.
 */
export async function* readCsvBlocks(path: string, framesPerBlock: number, selected?: readonly number[]): AsyncGenerator<RecordingBlock> {
  if (!Number.isInteger(framesPerBlock) || framesPerBlock < 1) {
    throw new RangeError(`framesPerBlock must be a positive integer, got ${framesPerBlock}`);
  }
  const full = await readCsvInfo(path);
  const info: RecordingInfo = { sampleRateHz: full.sampleRateHz, channels: full.channels, frames: full.frames, format: full.format };
  const row = new Float64Array(info.channels + 1);
  const wanted = new Set((selected ?? Array.from({ length: info.channels }, (_, c) => c)).filter((c) => c >= 0 && c < info.channels));
  const empty = new Float32Array(0);
  const newBlock = (n: number) => Array.from({ length: info.channels }, (_, c) => (wanted.has(c) ? new Float32Array(n) : empty));
  let blockFrames = Math.min(framesPerBlock, info.frames);
  let block = newBlock(blockFrames);
  let inBlock = 0;
  let unusable = 0;
  let startFrame = 0;
  let lineNo = 0;
  for await (const text of lines(path)) {
    lineNo++;
    if (lineNo === 1 || text.trim() === '') continue;
    parseRow(path, lineNo, text, row, full.channelNames);
    for (const c of wanted) {
      block[c][inBlock] = row[c + 1];
      if (Number.isNaN(row[c + 1])) unusable++;
    }
    inBlock++;
    if (inBlock === blockFrames) {
      yield { info, startFrame, t0S: startFrame / info.sampleRateHz, channels: block, unusableSamples: unusable };
      startFrame += inBlock;
      inBlock = 0;
      unusable = 0;
      if (startFrame >= info.frames) break;
      blockFrames = Math.min(framesPerBlock, info.frames - startFrame);
      block = newBlock(blockFrames);
    }
  }
  if (inBlock > 0 || startFrame < info.frames) {
    throw csvError(path, lineNo, `file changed while being read: expected ${info.frames} rows, read ${startFrame + inBlock}`);
  }
}
