/**
 * Runs of usable samples in a block whose unusable samples the reader made NaN: the engine is
 * fed only the runs, so a stretch of bad data is missing data to it (a gap when long enough),
 * never a number in a spectrum.
 */

/** [start, end) of each run of non-NaN samples, in order. */
export function usableRuns(samples: Float32Array): Array<[number, number]> {
  const runs: Array<[number, number]> = [];
  let start = -1;
  for (let i = 0; i < samples.length; i++) {
    const bad = Number.isNaN(samples[i]);
    if (!bad && start < 0) start = i;
    else if (bad && start >= 0) {
      runs.push([start, i]);
      start = -1;
    }
  }
  if (start >= 0) runs.push([start, samples.length]);
  return runs;
}
