/**
 * Identification against an independent model: a machine sweeping through structural modes,
 * integrated with the odex ODE solver (test/support/sweptModes.ts), fed to qband's engine as
 * replay would feed it; fn and Q come back from `identifyComponents`. Expected values are the
 * model's own parameters, never qband's functions.
 *
 * Tolerances are the targets: fn within 0.5 %, Q within 10 %, at realistic sweep rates
 * (30 rpm/s, about 1.4 % of the top speed per second, and 120 rpm/s, about 6 %/s). The map's
 * fn and Q are set off the truth (fn +4 %, Q x1.5) so the fit has to find them.
 */
import { describe, expect, it } from 'vitest';
import { identifyComponents } from '../src/identification/identifyComponents.ts';
import { synthesizeSweep, type SweepSpec } from './support/sweptModes.ts';
import { assetFromYaml, engineTransients, sweepMapYaml, sweepSpec, TACH_SPEED, TACHLESS_SPEED } from './support/sweepEngine.ts';

async function identify(yaml: string, spec: SweepSpec) {
  const asset = assetFromYaml(yaml);
  const signal = synthesizeSweep(spec);
  const { transients } = await engineTransients(asset, [signal.accelG, signal.tach], spec.sampleRateHz);
  return { transients, outcome: identifyComponents(asset, transients) };
}

function expectClose(what: string, actual: number, expected: number, relTol: number): void {
  const err = Math.abs(actual - expected) / expected;
  expect(err, `${what}: got ${actual}, model ${expected}, tolerance ${relTol * 100} %`).toBeLessThanOrEqual(relTol);
}

describe('identification against an ODE model of a sweep through a mode', () => {
  for (const q of [5, 10, 20, 50]) {
    it(`finds fn 25 Hz and Q ${q} from one run-up at 30 rpm/s with a tach (amplitude and phase)`, async () => {
      const { transients, outcome } = await identify(sweepMapYaml(TACH_SPEED, `[{ id: panel, fn_hz: 26, q: ${q * 1.5} }]`), sweepSpec([{ fnHz: 25, q, gain: 1 }], 40));
      expect(transients.map((t) => t.direction)).toEqual(['up']);
      expect(outcome.identified).toHaveLength(1);
      const r = outcome.identified[0].record;
      expect(r.method).toBe('amplitude and phase');
      expectClose('fn', r.fn_hz, 25, 0.005);
      expectClose('Q', r.q, q, 0.1);
      // The bounds are honest: they contain the truth.
      expect(r.fn_bounds_hz[0]).toBeLessThanOrEqual(25 * 1.005);
      expect(r.fn_bounds_hz[1]).toBeGreaterThanOrEqual(25 * 0.995);
    });
  }

  it('finds fn and Q on a faster run-up (120 rpm/s) and on a coast-down', async () => {
    for (const spec of [sweepSpec([{ fnHz: 25, q: 20, gain: 1 }], 10), sweepSpec([{ fnHz: 25, q: 20, gain: 1 }], 20, { rpm0: 2100, rpm1: 900 })]) {
      const { outcome } = await identify(sweepMapYaml(TACH_SPEED, '[{ id: panel, fn_hz: 26, q: 30 }]'), spec);
      expect(outcome.identified, JSON.stringify(outcome.rejected)).toHaveLength(1);
      expectClose('fn', outcome.identified[0].record.fn_hz, 25, 0.005);
      expectClose('Q', outcome.identified[0].record.q, 20, 0.1);
    }
  });

  it('without a tach, fits amplitude only on the tachless speed and still finds fn and Q', async () => {
    const spec = sweepSpec([{ fnHz: 25, q: 20, gain: 1 }], 40, {
      harmonics: [
        { multiple: 1, g: 0.002 },
        { multiple: 2, g: 0.001 },
        { multiple: 3, g: 0.0006 },
      ],
    });
    const { transients, outcome } = await identify(sweepMapYaml(TACHLESS_SPEED, '[{ id: panel, fn_hz: 26, q: 30 }]'), spec);
    expect(transients).toHaveLength(1);
    expect(transients[0].phase_reference).toBeNull();
    const r = outcome.identified[0].record;
    expect(r.method).toBe('amplitude');
    expectClose('fn', r.fn_hz, 25, 0.005);
    expectClose('Q', r.q, 20, 0.1);
  });

  it('separates two modes swept by the same order', async () => {
    const spec = sweepSpec(
      [
        { fnHz: 20, q: 15, gain: 1 },
        { fnHz: 30, q: 30, gain: 0.6 },
      ],
      40,
    );
    const { outcome } = await identify(sweepMapYaml(TACH_SPEED, '[{ id: pedestal, fn_hz: 20.6, q: 20 }, { id: duct, fn_hz: 29.4, q: 40 }]'), spec);
    const byId = new Map(outcome.identified.map((d) => [d.record.component, d.record]));
    expectClose('pedestal fn', byId.get('pedestal')?.fn_hz ?? 0, 20, 0.005);
    expectClose('pedestal Q', byId.get('pedestal')?.q ?? 0, 15, 0.1);
    expectClose('duct fn', byId.get('duct')?.fn_hz ?? 0, 30, 0.005);
    expectClose('duct Q', byId.get('duct')?.q ?? 0, 30, 0.1);
  });

  it('identifies nothing where the sweep passes no resonance, or where there is only noise', async () => {
    // The only mode sits at 60 Hz, far above the 15-35 Hz the 1X sweeps; the map expects one at 25 Hz.
    const far = await identify(sweepMapYaml(TACH_SPEED, '[{ id: panel, fn_hz: 25, q: 20 }]'), sweepSpec([{ fnHz: 60, q: 20, gain: 1 }], 40));
    expect(far.transients).toHaveLength(1);
    expect(far.outcome.identified).toEqual([]);
    expect(far.outcome.rejected.map((r) => r.component)).toEqual(['panel']);
    // Pure noise: the mode's gain is zero.
    const noise = await identify(sweepMapYaml(TACH_SPEED, '[{ id: panel, fn_hz: 25, q: 20 }]'), sweepSpec([{ fnHz: 25, q: 20, gain: 0 }], 40));
    expect(noise.outcome.identified).toEqual([]);
  });
});

describe('free decays after a trip', () => {
  it('reads Q from the logarithmic decrement of a mode left ringing by a fast coast-down', async () => {
    // A fan trips: 1000 -> 200 rpm in 4 s; its 5X blade pass sweeps down through a 40 Hz, Q 30
    // mode at about 17 Hz/s, faster than the mode's ring-down, which then rings on its own.
    const yaml = sweepMapYaml('{ source: tach, channel: 1, pulses_per_rev: 1, range_rpm: [300, 1200] }', '[{ id: guard, fn_hz: 40, q: 30 }]', '[{ id: blade-pass, multiple: 5 }]');
    const spec: SweepSpec = { ...sweepSpec([{ fnHz: 40, q: 30, gain: 1 }], 4, { rpm0: 1000, rpm1: 200, multiple: 5, noiseG: 0.00002 }), durationS: 8 };
    const asset = assetFromYaml(yaml);
    const signal = synthesizeSweep(spec);
    const { transients } = await engineTransients(asset, [signal.accelG, signal.tach], spec.sampleRateHz);
    expect(transients.map((t) => t.direction)).toEqual(['down']);
    const { findFreeDecays } = await import('../src/identification/freeDecay.ts');
    const fits = transients[0].decays.flatMap((d) => findFreeDecays(d, transients[0].orders));
    expect(fits.length).toBeGreaterThanOrEqual(1);
    expectClose('decay Q', fits[0].q, 30, 0.1);
    expectClose('ringing fn', fits[0].fnHz, 40, 0.005);
    // Too fast for the sweep fit (a few rows across the band): the band comes from the decay.
    const outcome = identifyComponents(asset, transients);
    const r = outcome.identified[0]?.record;
    expect(r?.method, JSON.stringify(outcome.rejected)).toBe('free decay');
    expectClose('identified fn', r!.fn_hz, 40, 0.005);
    expectClose('identified Q', r!.q, 30, 0.1);
    expect(r!.q_bounds[0]).toBeLessThan(r!.q);
    expect(r!.q_bounds[1]).toBeGreaterThan(r!.q);
    // Its picture: the envelope and the fitted exponential.
    const { identificationFigures } = await import('../src/render/identificationFigure.ts');
    const figures = identificationFigures(outcome.identified[0]);
    expect(figures.map((f) => f.name)).toEqual(['fan-guard-blade-pass-decays.svg']);
    expect(figures[0].svg).toContain('free decay at');
    if (process.env.QBAND_KEEP_SVG) (await import('node:fs')).writeFileSync(process.env.QBAND_KEEP_SVG, figures[0].svg);
  });
});
