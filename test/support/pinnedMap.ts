import { expect } from 'vitest';
import { parseAssetMap, type ConfigProblem } from '../../src/config/parseAssetMap.ts';

// The asset map tests' fixture (test/assetMapReading.test.ts, test/assetMapRules.test.ts): the
// pinned example and variants of it.

// The example as pinned in the project brief: it must validate unchanged.
export const PINNED = `site: north-basin
assets:
  - id: cw-pump-2
    description: Vertical cooling-water pump on a variable-speed drive
    procedure: "North basin procedure RM-12, rotating machinery vibration response"
    speed:
      source: tach          # tach | spectrum | topic (live agent)
      channel: 1            # recording channel with the once-per-rev pulse
      pulses_per_rev: 1
      range_rpm: [450, 1200]
    orders:
      - { id: 1x, multiple: 1 }
      - { id: 2x, multiple: 2 }
      - { id: vane-pass, multiple: 5 }
    sensors:
      - { id: motor-top-x, channel: 0, units: g }
    components:
      - { id: motor-reed, fn_hz: 14.2, q: 8, orders: [1x] }
      - { id: discharge-pipe, fn_hz: 83.0, zeta: 0.03 }
    alarm: { on_delay_s: 30, off_delay_s: 10, deadband_pct: 1, priority: high }
`;

/** A valid asset with one field replaced; `extra` lines are added under the asset. */
export function variant(replace: [string, string][] = [], extra = ''): string {
  let text = PINNED;
  for (const [from, to] of replace) {
    expect(text.includes(from), `fixture contains ${from}`).toBe(true);
    text = text.replace(from, to);
  }
  return text + extra;
}

export function problemsOf(text: string): ConfigProblem[] {
  return parseAssetMap(text, 'test.yaml').problems;
}

export function describeProblems(ps: ConfigProblem[]): string {
  return ps.map((p) => `${p.code} ${p.message}`).join('\n');
}
