import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { readCsvBlocks, readCsvInfo, TIME_STEP_TOLERANCE } from '../src/acquisition/csvRecording.ts';
import { openRecording, readRecordingInfo } from '../src/acquisition/recordingReader.ts';
import type { RecordingBlock } from '../src/acquisition/wav.ts';
import { QbandError } from '../src/errors.ts';

const dir = mkdtempSync(join(tmpdir(), 'qband-csv-'));
let n = 0;
function csv(text: string): string {
  const p = join(dir, `r${n++}.csv`);
  writeFileSync(p, text);
  return p;
}

async function collect(gen: AsyncGenerator<RecordingBlock>): Promise<RecordingBlock[]> {
  const out: RecordingBlock[] = [];
  for await (const b of gen) out.push(b);
  return out;
}

async function expectCsvError(path: string, line: number, quote: RegExp): Promise<void> {
  const err = await readCsvInfo(path).then(
    () => undefined,
    (e: unknown) => e,
  );
  expect(err).toBeInstanceOf(QbandError);
  expect((err as QbandError).code).toBe('QB_E_CSV_FORMAT');
  expect((err as QbandError).message).toContain(`${path}:${line}:`);
  expect((err as QbandError).message).toMatch(quote);
}

/** Rows at `fsHz` from t0, times printed with `decimals` decimals. */
function rows(frames: number, fsHz: number, t0 = 0, decimals = 6): string {
  let s = 'time_s,motor-x,pump-y\n';
  for (let i = 0; i < frames; i++) s += `${(t0 + i / fsHz).toFixed(decimals)},${i},${-i / 2}\n`;
  return s;
}

describe('CSV recordings', () => {
  it('reads header names, frames and the rate from the time column', async () => {
    const info = await readCsvInfo(csv(rows(101, 2560)));
    expect(info.channelNames).toEqual(['motor-x', 'pump-y']);
    expect(info.frames).toBe(101);
    expect(info.channels).toBe(2);
    // fs = (rows-1)/(t_last - t_first) = 100 / 0.0390625 s; t_last printed to 6 decimals is off by
    // up to 5e-7 s, i.e. 1.28e-5 of the span: tolerance 2e-5 relative.
    const rel = Math.abs(info.sampleRateHz - 2560) / 2560;
    if (rel > 2e-5) expect.fail(`101 rows at 2560 Hz: expected 2560 Hz, got ${info.sampleRateHz}, relative error ${rel} > 2e-5`);
  });

  it('streams blocks across a block boundary in the middle of the file, channels in column order', async () => {
    const blocks = await collect(readCsvBlocks(csv(rows(10, 100)), 4));
    expect(blocks.map((b) => [b.startFrame, b.channels[0].length])).toEqual([
      [0, 4],
      [4, 4],
      [8, 2],
    ]);
    expect(Array.from(blocks[1].channels[0])).toEqual([4, 5, 6, 7]);
    expect(Array.from(blocks[2].channels[1])).toEqual([-4, -4.5]);
    expect(blocks[2].t0S).toBeCloseTo(0.08, 12);
  });

  it('accepts CRLF line ends, a byte-order mark, spaces and a trailing blank line; keeps no time origin', async () => {
    const path = csv('\uFEFFtime_s, a\r\n10.0, 1\r\n10.5, 2\r\n11.0, 3\r\n\r\n');
    const blocks = await collect(openRecording(path, 100));
    expect(blocks[0].info).toEqual({ sampleRateHz: 2, channels: 1, frames: 3, format: 'csv' });
    expect(blocks[0].t0S).toBe(0);
    expect(Array.from(blocks[0].channels[0])).toEqual([1, 2, 3]);
    expect(await readRecordingInfo(path)).toEqual(blocks[0].info);
  });

  it('accepts times rounded to 6 decimals at 48 kHz (rounding about 2.4 % of a step)', async () => {
    const info = await readCsvInfo(csv(rows(2000, 48000)));
    // span 1999/48000 s, end time off by up to 5e-7 s: 1.2e-5 relative; tolerance 2e-5.
    const rel = Math.abs(info.sampleRateHz - 48000) / 48000;
    if (rel > 2e-5) expect.fail(`2000 rows at 48 kHz: expected 48000 Hz, got ${info.sampleRateHz}, relative error ${rel} > 2e-5`);
  });

  // Exactly on the tolerance edge is awkward in binary floating point; 5 % either side of it is not.
  it(`a step ${TIME_STEP_TOLERANCE * 100 - 5} % off the mean passes, ${TIME_STEP_TOLERANCE * 100 + 5} % off fails`, async () => {
    const jitter = (frac: number) => {
      // 41 rows at 1 Hz, row 20 moved by frac of a step: steps 1+frac and 1-frac, mean still 1 s.
      let s = 'time_s,a\n';
      for (let i = 0; i <= 40; i++) s += `${i === 20 ? i + frac : i},0\n`;
      return csv(s);
    };
    await expect(readCsvInfo(jitter(TIME_STEP_TOLERANCE - 0.05))).resolves.toMatchObject({ frames: 41, sampleRateHz: 1 });
    await expectCsvError(jitter(TIME_STEP_TOLERANCE + 0.05), 23, /differs from the mean step 1 s/);
  });

  it('one data row: the rate is unknown', () => expectCsvError(csv('time_s,a\n0,1\n'), 2, /1 data row/));
  it('empty file', () => expectCsvError(csv(''), 1, /empty/));
  it('header without time_s first', () => expectCsvError(csv('t,a\n0,1\n1,2\n'), 1, /'t', expected 'time_s'/));
  it('header with no channels', () => expectCsvError(csv('time_s\n0\n1\n'), 1, /no channel columns/));
  it('duplicate column names', () => expectCsvError(csv('time_s,a,a\n0,1,1\n'), 1, /'a' appears twice/));
  it('a row with too few columns names its line', () => expectCsvError(csv('time_s,a,b\n0,1,2\n0.1,1\n'), 3, /2 columns, the header has 3/));
  it('a non-number names its line and column', () => expectCsvError(csv('time_s,a\n0,1\n0.1,x1\n'), 3, /column 'a' holds 'x1'/));
  it('NaN is refused', () => expectCsvError(csv('time_s,a\n0,1\n0.1,NaN\n'), 3, /'NaN'/));
  it('an empty cell is refused', () => expectCsvError(csv('time_s,a\n0,\n'), 2, /column 'a' holds ''/));
  it('time going backwards', () => expectCsvError(csv('time_s,a\n0,1\n0.1,1\n0.05,1\n'), 4, /0.05 does not increase/));
  it('a missing row (a step of two periods) names its line', async () => {
    const text = rows(50, 100).split('\n');
    text.splice(21, 1); // drop the row of frame 20 (line 22)
    await expectCsvError(csv(text.join('\n')), 22, /differs from the mean step/);
  });
});
