import { describe, expect, it } from 'vitest';
import { asset } from './support/simulationFixtures.ts';
import { checkProfileAgainstAsset, parseProfile } from '../src/simulation/profile.ts';

// The simulator's speed profile: its YAML read with every problem located, and checked against
// the asset it is run on.

describe('speed profile YAML', () => {
  const good = `asset: test-fan
sample_rate_hz: 2560
start_rpm: 450
segments:
  - { hold_s: 10 }
  - { ramp_to_rpm: 852, over_s: 20 }
forcing:
  1x: 0.02
  blade-pass: { amplitude_g: 0.01, scaling: constant }
noise_g: 0.002
seed: 7
`;
  it('reads the example', () => {
    const { profile: p, problems } = parseProfile(good);
    expect(problems).toEqual([]);
    expect(p).toEqual({
      assetId: 'test-fan',
      sampleRateHz: 2560,
      startRpm: 450,
      segments: [{ kind: 'hold', durationS: 10 }, { kind: 'ramp', toRpm: 852, durationS: 20 }],
      forcing: [{ orderId: '1x', amplitudeG: 0.02, scaling: 'speed-squared' }, { orderId: 'blade-pass', amplitudeG: 0.01, scaling: 'constant' }],
      noiseG: 0.002,
      seed: 7,
    });
  });

  it('reports every problem at once with path, line and column, under QB_E_PROFILE_INVALID', () => {
    const bad = `sample_rate_hz: 2560.5
start_rpm: -1
segmnets: []
forcing:
  1x: { amplitude_g: 0.02, scaling: cubic }
`;
    const { profile: p, problems } = parseProfile(bad);
    expect(p).toBeNull();
    expect(problems.map((x) => [x.code, x.message])).toEqual([
      ['QB_E_PROFILE_INVALID', 'segments: required, must be a list of segments ({ hold_s } or { ramp_to_rpm, over_s }) (line 1, col 1)'],
      ['QB_E_PROFILE_INVALID', 'sample_rate_hz: must be an integer >= 1 and <= 1000000, got 2560.5 (line 1, col 17)'],
      ['QB_E_PROFILE_INVALID', 'start_rpm: must be a number >= 0 and <= 1000000, got -1 (line 2, col 12)'],
      ['QB_E_PROFILE_INVALID', "segmnets: unknown key, did you mean 'segments'? (line 3, col 1)"],
      ['QB_E_PROFILE_INVALID', "forcing.1x.scaling: must be one of 'speed-squared', 'constant', got 'cubic' (line 5, col 37)"],
    ]);
  });

  it('a segment is a hold or a ramp, not both; lengths must be > 0', () => {
    const { problems } = parseProfile('sample_rate_hz: 100\nstart_rpm: 0\nforcing: {}\nsegments:\n  - { hold_s: 0 }\n  - { hold_s: 1, ramp_to_rpm: 5 }\n  - { ramp_to_rpm: 5 }\n');
    expect(problems.map((x) => x.message)).toEqual([
      'segments[0].hold_s: must be a number > 0, got 0 (line 5, col 15)',
      "segments[1].ramp_to_rpm: does not apply here: a segment is either a hold (hold_s) or a ramp (ramp_to_rpm with over_s) (line 6, col 18)",
      'segments[2].over_s: required, must be a number > 0 (line 7, col 5)',
    ]);
  });

  it('YAML that does not parse is QB_E_PROFILE_SYNTAX with its line', () => {
    const { problems } = parseProfile('sample_rate_hz: 2560\nsegments: [ { hold_s: 1 }\n');
    expect(problems[0].code).toBe('QB_E_PROFILE_SYNTAX');
    expect(problems[0].line).toBeGreaterThanOrEqual(2);
  });

  it('checks the profile against the asset: asset id, order ids (with line) and the Nyquist margin', () => {
    const text = good.replace('asset: test-fan', 'asset: other-fan').replace('  1x: 0.02', '  1x: 0.02\n  4x: 0.01').replace('sample_rate_hz: 2560', 'sample_rate_hz: 150');
    const { profile: p, positions, problems } = parseProfile(text);
    expect(problems).toEqual([]);
    const found = checkProfileAgainstAsset(p!, asset(), positions).map((x) => [x.code, x.message]);
    expect(found).toEqual([
      ['QB_E_PROFILE_ASSET', "asset: profile is for asset 'other-fan', but it is being run on 'test-fan' (line 1, col 8)"],
      ['QB_E_PROFILE_ASSET', "forcing.4x: asset 'test-fan' has no order '4x' (its orders: 1x, blade-pass) (line 9, col 3)"],
      // 7 x 852 / 60 = 99.4 Hz >= 0.45 x 150 = 67.5 Hz; raise to above 99.4/0.45 = 221 Hz.
      ['QB_E_PROFILE_ASSET', "forcing.blade-pass: order 'blade-pass' reaches 99.40 Hz at 852 rpm, too close to half the sample rate; raise sample_rate_hz above 221 (line 10, col 3)"],
    ]);
  });
});
