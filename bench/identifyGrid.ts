/**
 * `npm run bench:identify`: how well identification recovers fn and Q, on a grid of Q and
 * sweep rates, with and without a tach, from an independent model of a machine sweeping
 * through one mode (test/support/sweptModes.ts: an ODE integrated by odex). Prints a markdown
 * table (the one in docs/engine.md) and the time the fits took.
 *
 * The model: 1X unbalance (force grows as speed^2) from 900 to 2100 rpm through a 25 Hz mode,
 * sampled at 2048 Hz with white noise at 0.2 mg (about 1/20 of the mode's off-resonance level
 * at 900 rpm); tachless runs add 1X, 2X and 3X direct lines for the speed estimate to lock on.
 * The map's fn and Q are set off the truth (fn +4 %, Q x1.5).
 */
import { identifyComponents } from '../src/identification/identifyComponents.ts';
import { synthesizeSweep } from '../test/support/sweptModes.ts';
import { assetFromYaml, engineTransients, sweepMapYaml, sweepSpec, TACH_SPEED, TACHLESS_SPEED } from '../test/support/sweepEngine.ts';
import { benchArgs } from './benchArgs.ts';

benchArgs(
  {},
  `Usage: npm run bench:identify

How well identification recovers fn and Q on a grid of Q and sweep rates, with and without a
tach, from an independent model of a machine sweeping through one 25 Hz mode (an ODE integrated
by odex). Prints a markdown table (the one in docs/engine.md) and the time the fits took. No
options.
`,
);

async function one(q: number, rampS: number, tach: boolean): Promise<string> {
  const asset = assetFromYaml(sweepMapYaml(tach ? TACH_SPEED : TACHLESS_SPEED, `[{ id: panel, fn_hz: 26, q: ${q * 1.5} }]`));
  const spec = sweepSpec([{ fnHz: 25, q, gain: 1 }], rampS, {
    seed: 17,
    harmonics: tach ? undefined : [{ multiple: 1, g: 0.002 }, { multiple: 2, g: 0.001 }, { multiple: 3, g: 0.0006 }],
  });
  const signal = synthesizeSweep(spec);
  const { transients } = await engineTransients(asset, [signal.accelG, signal.tach], spec.sampleRateHz);
  const outcome = identifyComponents(asset, transients);
  const r = outcome.identified[0]?.record;
  if (!r) return `none (${outcome.rejected[0]?.reason ?? `${transients.length} transient(s)`})`;
  const fnErr = ((r.fn_hz - 25) / 25) * 100;
  const qErr = ((r.q - q) / q) * 100;
  return `${fnErr >= 0 ? '+' : ''}${fnErr.toFixed(2)} % / ${qErr >= 0 ? '+' : ''}${qErr.toFixed(1)} %`;
}

const ramps = [40, 10, 4];
console.log('fn error / Q error against the model (25 Hz mode, 1X run-up 900 -> 2100 rpm)\n');
console.log(`| speed | Q | ${ramps.map((r) => `${(1200 / r).toFixed(0)} rpm/s (${((1200 / r / 2100) * 100).toFixed(1)} %/s)`).join(' | ')} |`);
console.log(`| --- | --- | ${ramps.map(() => '---').join(' | ')} |`);
const started = performance.now();
for (const tach of [true, false]) {
  for (const q of [5, 10, 20, 50]) {
    const cells: string[] = [];
    for (const rampS of ramps) cells.push(await one(q, rampS, tach));
    console.log(`| ${tach ? 'tach' : 'tachless'} | ${q} | ${cells.join(' | ')} |`);
  }
}
console.log(`\n${((performance.now() - started) / 1000).toFixed(1)} s for the grid (synthesis, engine and fits)`);
