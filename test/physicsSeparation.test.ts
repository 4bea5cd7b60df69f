import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { assetCrossings, crossingOf } from '../src/physics/crossings.ts';
import { qFromZeta, velocityHalfPowerBand } from '../src/physics/halfPowerBand.ts';
import { actualSeparationMargin, requiredSeparationMarginPct } from '../src/physics/separationMargin.ts';
import { parseAssetMap } from '../src/config/parseAssetMap.ts';
import { expectNear, expectRel } from './support/expectNear.ts';

// Separation margins (required and actual) and the crossings of orders with component bands.

describe('separation margin', () => {
  // The required separation margin follows the API 684 rule from the amplification factor
  // (formula recalled from memory); that rule is written for rotor critical speeds and serves
  // here as a screening figure for structural resonances.
  // Caps of 16 % below and 26 % above the operating range, in the form commonly cited from
  // API 617 (8th edition, 6.8.2.5); the standard's own text was not available here to check against.
  // Worked by hand: AF 8 -> 17 (1 - 1/6.5) = 14.3846 % below, 24.3846 % above.
  it('AF 8: 14.38 % below the range, 24.38 % above', () => {
    expectNear('below, AF 8', requiredSeparationMarginPct(8, 'below'), 14.384615, 1e-6);
    expectNear('above, AF 8', requiredSeparationMarginPct(8, 'above'), 24.384615, 1e-6);
  });

  it('AF < 2.5 needs no margin (AF 2.49 and AF 0.5)', () => {
    expect(requiredSeparationMarginPct(2.49, 'below')).toBe(0);
    expect(requiredSeparationMarginPct(2.49, 'above')).toBe(0);
    expect(requiredSeparationMarginPct(0.5, 'above')).toBe(0);
  });

  it('caps the margin at 16 % below and 26 % above for very sharp resonances (AF 30)', () => {
    // By hand: 17 (1 - 1/28.5) = 16.404 % -> capped at 16; 10 + 16.404 = 26.404 -> capped at 26.
    expectNear('below, AF 30', requiredSeparationMarginPct(30, 'below'), 16, 1e-12);
    expectNear('above, AF 30', requiredSeparationMarginPct(30, 'above'), 26, 1e-12);
    // Just under where the caps bind (AF 18.5: 17 (1 - 1/17) = 16 exactly).
    expectNear('below, AF 18', requiredSeparationMarginPct(18, 'below'), 17 * (1 - 1 / 16.5), 1e-12);
  });

  it('exactly on AF 2.5: 0 % below, 10 % above', () => {
    // 17 (1 - 1/(2.5 - 1.5)) = 0 by hand.
    expectNear('below, AF 2.5', requiredSeparationMarginPct(2.5, 'below'), 0, 1e-12);
    expectNear('above, AF 2.5', requiredSeparationMarginPct(2.5, 'above'), 10, 1e-12);
  });

  it('actual margin: below min, above max, inside, exactly on an edge', () => {
    // By hand: (450 - 400)/450 = 11.111 %; (1500 - 1200)/1200 = 25 %.
    const range: [number, number] = [450, 1200];
    const below = actualSeparationMargin(400, range);
    expect(below.position).toBe('below');
    expectNear('below', below.marginPct, 11.111111, 1e-5);
    const above = actualSeparationMargin(1500, range);
    expect(above.position).toBe('above');
    expectNear('above', above.marginPct, 25, 1e-12);
    const inside = actualSeparationMargin(852, range);
    expect(inside.position).toBe('inside');
    // Nearer edge 1200: (1200 - 852)/1200 = 29 %.
    expectNear('inside', inside.marginPct, -29, 1e-9);
    expect(actualSeparationMargin(450, range)).toEqual({ position: 'inside', marginPct: -0 });
  });
});

describe('crossings', () => {
  it('the pinned example: speeds, bands and verdicts by hand', () => {
    const text = readFileSync(new URL('../config/example-map.yaml', import.meta.url), 'utf8');
    const { map } = parseAssetMap(text, 'example-map.yaml');
    const xs = assetCrossings(map!.assets[0]);
    // motor-reed: 1x only. discharge-pipe: every order (no `orders` list).
    expect(xs.map((x) => `${x.orderId}/${x.componentId}`)).toEqual([
      '1x/motor-reed',
      '1x/discharge-pipe',
      '2x/discharge-pipe',
      'vane-pass/discharge-pipe',
    ]);
    // By hand: 14.2 Hz * 60 / 1 = 852 rpm, inside 450-1200.
    expectNear('motor-reed 1x rpm', xs[0].speedRpm, 852, 1e-9);
    expect(xs[0].verdict).toBe('inside-range');
    // 83 Hz * 60 / 2 = 2490 rpm, above 1200 by 107.5 %; Q = 1/0.06 = 16.667,
    // required 10 + 17 (1 - 1/15.1667) = 25.879 %.
    expectNear('pipe 2x rpm', xs[2].speedRpm, 2490, 1e-9);
    expectNear('pipe 2x actual', xs[2].actualMarginPct, 107.5, 1e-9);
    expectNear('pipe 2x required', xs[2].requiredMarginPct, 25.879, 1e-3);
    expect(xs[2].verdict).toBe('margin-ok');
    // 83 * 60 / 5 = 996 rpm: inside.
    expectNear('pipe vane rpm', xs[3].speedRpm, 996, 1e-9);
    expect(xs[3].verdict).toBe('inside-range');
    // Speed band = band * 60 / multiple.
    const band = velocityHalfPowerBand(83, qFromZeta(0.03));
    expectRel('pipe 2x band lo', xs[2].speedBandRpm[0], (band[0] * 60) / 2, 1e-12);
  });

  it('margin short, and no margin needed for AF < 2.5', () => {
    // 21 Hz at 1x: 1260 rpm, 5 % above 1200 rpm; AF 8 needs 24.38 % (by hand).
    const short = crossingOf('1x', 1, 'c', 21, velocityHalfPowerBand(21, 8), 8, [450, 1200]);
    expect(short.verdict).toBe('margin-short');
    expect(short.bandOverlapsRange).toBe(true);
    const damped = crossingOf('1x', 1, 'c', 21, velocityHalfPowerBand(21, 2), 2, [450, 1200]);
    expect(damped.verdict).toBe('no-margin-needed');
  });
});
