// Bad input in maps and on the command line, as a new user or a hostile file would give it:
// every case ends with a clear message carrying its code and the promised exit code; never a
// stack trace, a hang or a blow-up. One `describe` per finding of the bad-input review
// (numbered as there; the recording findings are in badInputRecording.test.ts).
import { chmodSync, mkdirSync, readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { decodeSampleBlock } from '../src/acquisition/samplePayload.ts';
import { parseOperatorCommand } from '../src/agent/operatorCommand.ts';
import { EXIT_CODES_HELP } from '../src/cli/io.ts';
import { parseAssetMap } from '../src/config/parseAssetMap.ts';
import { isPrintable } from '../src/text/printable.ts';
import { ALARM, DEMO_MAP, ROOT, dir, file, mapWith, run } from './support/badInputRig.ts';

describe('1. a missing, directory or unreadable map: a clean error in every command', () => {
  const missing = join(dir, 'no-such-map.yaml');
  const folder = join(dir, 'a-folder.yaml');
  mkdirSync(folder);
  const cases: Array<[string, string[]]> = [
    ['replay', ['replay', '--map', '%MAP%', 'demo/north-basin-runup.wav']],
    ['check', ['check', '%MAP%']],
    ['simulate', ['simulate', '--map', '%MAP%', '--profile', 'config/demo-profile.yaml', '-o', join(dir, 'never.wav')]],
    ['run', ['run', '--map', '%MAP%', '--no-state', '--no-watch', '--log-level', 'error']],
  ];
  for (const [command, args] of cases) {
    for (const [what, path, reason] of [
      ['missing', missing, 'no such file'],
      ['a directory', folder, 'it is a directory'],
    ] as const) {
      it(`${command}: ${what} map is exit 1 with QB_E_FILE_READ on one line`, async () => {
        const r = await run(...args.map((a) => (a === '%MAP%' ? path : a)));
        expect(r.code).toBe(1);
        expect(r.err).toBe(`qband ${command}: cannot read asset map '${path}' (${reason}) [QB_E_FILE_READ]\n`);
      });
    }
  }

  it('a map without read permission is QB_E_FILE_READ too (skipped as root, who may read anything)', async (ctx) => {
    if (process.getuid?.() === 0) {
      console.log('skipped: running as root, file permissions do not stop reads');
      ctx.skip();
    }
    const p = file(DEMO_MAP, '.yaml');
    chmodSync(p, 0o000);
    const r = await run('check', p);
    expect(r.code).toBe(1);
    expect(r.err).toMatch(/permission denied.*\[QB_E_FILE_READ\]/);
  });
});

describe('4-6. analysis keys: check refuses what replay or run would refuse, or could not run', () => {
  const cases: Array<[string, string, RegExp]> = [
    ['decision_step_s 1e-9 (would hang replay)', 'analysis: { decision_step_s: 1e-9 }', /analysis\.decision_step_s: must be a number >= 0\.01 and <= 60, got 1e-9 \(line 35, col \d+\)/],
    ['frame_size 4194304 with 100000 averages (about 1.7 TB)', 'analysis: { frame_size: 4194304, decimation: 1, averages: 100000 }', /analysis\.averages: must be an integer >= 1 and <= 1000, got 100000 \(line 35/],
    ['averages 100000000 (refused only by replay before)', 'analysis: { averages: 100000000 }', /analysis\.averages: must be an integer >= 1 and <= 1000, got 100000000 \(line 35/],
    ['a frame and averages whose spectrum needs 444 MiB a sensor', 'analysis: { frame_size: 1048576, averages: 100 }', /analysis\.averages: frame_size 1048576 with averages 100 needs 444\.0 MiB per sensor, more than the 64\.0 MiB allowed/],
    ['decimation beyond the decimator', 'analysis: { decimation: 131072 }', /analysis\.decimation: must be an integer >= 1 and <= 65536, got 131072/],
    ['overlap 0.9999 (an FFT every sample)', 'analysis: { overlap: 0.9999 }', /analysis\.overlap: must be a number >= 0 and <= 0\.9, got 0\.9999/],
  ];
  for (const [what, block, message] of cases) {
    it(`${what}: check and replay both exit 1 with the key, line and column`, async () => {
      const map = mapWith(block);
      const check = await run('check', map);
      expect(check.code).toBe(1);
      expect(check.err).toMatch(message);
      expect(check.err).toMatch(/QB_E_CONFIG_RANGE/);
      const replay = await run('replay', '--map', map, 'demo/north-basin-runup.wav');
      expect(replay.code).toBe(1);
      expect(replay.err).toMatch(message);
    });
  }

  it('agent keys the sequencer would refuse (reorder_window 5000) are refused by check', async () => {
    const map = file(DEMO_MAP.replace('site: north-basin', 'site: north-basin\nagent: { reorder_window: 5000 }'), '.yaml');
    const r = await run('check', map);
    expect(r.code).toBe(1);
    expect(r.err).toMatch(/agent\.reorder_window: must be an integer >= 0 and <= 1024, got 5000 \(line 15, col \d+\)/);
  });

  it('6. a recording at 1e12 Hz is refused by a message that names the rate', async () => {
    const csv = file('time_s,acc,tach\n0,0,0\n1e-12,0,0\n2e-12,0,0\n', '.csv');
    const r = await run('replay', '--map', 'config/demo-map.yaml', csv);
    expect(r.code).toBe(1);
    expect(r.err).toMatch(/sample rate 1e\+12 Hz is outside the 1 Hz to 1000000 Hz qband reads \[QB_E_CSV_FORMAT\]/);
  });
});

describe('7. input size and problem count are capped', () => {
  it('a map over 1 MiB is refused without being parsed (QB_E_CONFIG_TOO_LARGE)', async () => {
    const big = file(`site: x\nassets:\n${'  - {id: a}\n'.repeat(120_000)}`, '.yaml');
    const r = await run('check', big);
    expect(r.code).toBe(1);
    expect(r.err).toMatch(/is larger than 1\.0 MiB, the most qband reads \[QB_E_CONFIG_TOO_LARGE\]\n$/);
  });

  it('a map with thousands of problems lists 100 and counts the rest', async () => {
    const many = file(`site: x\nassets:\n${Array.from({ length: 3000 }, (_, i) => `  - {id: a${i}}\n`).join('')}`, '.yaml');
    const r = await run('check', many);
    expect(r.code).toBe(1);
    const lines = r.err.trimEnd().split('\n');
    expect(lines.filter((l) => / error QB_E_/.test(l))).toHaveLength(100);
    // Each of the 3000 assets lacks speed, orders, sensors, components and alarm.
    expect(r.err).toContain('and 14900 more problems not listed');
    expect(lines.at(-1)).toMatch(/not valid, 15000 problems$/);
    const json = await run('check', many, '--json');
    const doc = JSON.parse(json.out);
    expect([doc.problems.length, doc.problems_not_listed]).toEqual([100, 14_900]);
  });
});

describe('7. ... and so is the work a map implies', () => {
  it('aliases that expand into millions of values ("billion laughs") are refused at the first alias', () => {
    const lines = ['site: x', 'l0: &l0 [x, x, x, x, x, x, x, x, x, x]'];
    for (let i = 1; i < 20; i++) lines.push(`l${i}: &l${i} [${Array(10).fill(`*l${i - 1}`).join(', ')}]`);
    lines.push('assets: *l19');
    const r = parseAssetMap(lines.join('\n'), 'laughs.yaml');
    expect(r.problems.map((p) => [p.code, p.line, p.col])).toEqual([['QB_E_CONFIG_TOO_LARGE', 3, 10]]);
    expect(r.problems[0].message).toMatch(/aliases \(\*name\) expand the map to more than 200000 values/);
  });

  it('an alias inside its own anchor is refused, not followed forever', () => {
    const r = parseAssetMap('site: x\nassets: &a [*a]\n', 'self.yaml');
    expect(r.problems.map((p) => p.code)).toEqual(['QB_E_CONFIG_TOO_LARGE']);
  });

  it('aliases within the bound still work: an anchored alarm block shared by two assets', () => {
    const two = DEMO_MAP.replace(ALARM, `    alarm: &alarm ${ALARM.trim().slice('alarm: '.length)}`) + DEMO_MAP.slice(DEMO_MAP.indexOf('  - id: cw-pump-2')).replace('cw-pump-2', 'cw-pump-3').replace(ALARM, '    alarm: *alarm').replace('channel: 1,', 'channel: 1, topic: t3,').replace('channel: 0,', 'channel: 0, topic: s3,');
    const r = parseAssetMap(two, 'two.yaml');
    expect(r.problems).toEqual([]);
    expect(r.map!.assets[1].alarm).toEqual(r.map!.assets[0].alarm);
  });

  it('a component listing an order twice, and an asset with more than 4096 (component, order) pairs', () => {
    const twice = parseAssetMap(DEMO_MAP.replace('orders: [1x] }', 'orders: [1x, 2x, 1x] }'), 'twice.yaml');
    expect(twice.problems.map((p) => p.message)).toEqual([expect.stringMatching(/components\[0\]\.orders\[2\]: order '1x' is listed twice \(line 32,/)]);
    const orders = Array.from({ length: 70 }, (_, i) => `      - { id: o${i}, multiple: ${i + 1} }`).join('\n');
    const comps = Array.from({ length: 70 }, (_, i) => `      - { id: c${i}, fn_hz: ${10 + i}, q: 5 }`).join('\n');
    const text = DEMO_MAP.replace(/    orders:\n[\s\S]*?    sensors:/, `    orders:\n${orders}\n    sensors:`).replace(/    components:\n[\s\S]*?    alarm:/, `    components:\n${comps}\n    alarm:`);
    const many = parseAssetMap(text, 'many.yaml');
    expect(many.problems.map((p) => p.message)).toEqual([expect.stringMatching(/assets\[0\]\.components: 70 components with their orders make 4900 \(component, order\) pairs to watch, more than the 4096 allowed/)]);
  });
});

describe('9. echoed values are escaped and cut short', () => {
  it('a site with ESC, BEL, NUL and a bidi override is shown escaped', async () => {
    const map = file('site: "x\\e]0;pwned\\a\\0\\u202eevil"\nassets: 1\n', '.yaml');
    const r = await run('check', map);
    expect(r.code).toBe(1);
    expect(r.err).toContain(String.raw`got 'x\x1b]0;pwned\x07\x00\u202eevil'`);
  });

  it('a huge scalar is cut with a count of what was left out', async () => {
    const map = file(`site: ${'z'.repeat(500_000)}\nassets: 1\n`, '.yaml');
    const r = await run('check', map);
    expect(r.code).toBe(1);
    expect(r.err).toMatch(/got 'z{80}\.\.\. \(499920 more characters\)'/);
    for (const line of r.err.split('\n')) expect(line.length).toBeLessThan(1000);
  });

  it('kilobytes of a binary file given as a map come back printable and short', async () => {
    const bytes = Buffer.alloc(64 * 1024);
    for (let i = 0; i < bytes.length; i++) bytes[i] = (i * 7919 + 13) % 256;
    const r = await run('check', file(bytes, '.yaml'));
    expect(r.code).toBe(1);
    expect(r.err.length).toBeLessThan(100 * 1000);
  });

  it('free text (description, procedure) is escaped in the check report', async () => {
    const map = file(DEMO_MAP.replace('description: Vertical', 'description: "\\e[31mred\\e[0m Vertical'), '.yaml');
    const fixed = readFileSync(map, 'utf8').replace('red\\e[0m Vertical cooling-water pump on a variable-speed drive', 'red\\e[0m Vertical"');
    writeFileSync(map, fixed);
    const r = await run('check', map);
    expect(r.code).toBe(0);
    expect(r.out).toContain(String.raw`cw-pump-2: \x1b[31mred\x1b[0m Vertical`);
  });
});

describe('9. ... and in what the live agent logs and publishes', () => {
  const enc = new TextEncoder();
  it('a payload value with ESC and a bidi override is escaped in the drop detail', () => {
    const r = decodeSampleBlock(enc.encode(String.raw`{"t":"\u001b]0;x\u0007\u202e","fs":1,"seq":0,"samples":[1]}`), { maxSamples: 16 });
    expect(r.ok).toBe(false);
    const detail = r.ok ? '' : r.detail;
    expect(isPrintable(detail)).toBe(true);
    expect(detail).toContain(String.raw`\u001b]0;x\u0007\u202e`);
  });

  it('an operator note with control characters is refused, not stored', () => {
    const asset = parseAssetMap(DEMO_MAP, 'demo').map!.assets[0];
    const r = parseOperatorCommand(enc.encode(JSON.stringify({ action: 'acknowledge', component: 'motor-reed', order: '1x', note: 'ok\u001b[2J' })), asset, { maxShelveS: 3600, maxCommandAgeS: 300, maxFutureS: 60, nowS: Date.now() / 1000 });
    expect(r.ok).toBe(false);
    expect(r.ok ? '' : r.detail).toMatch(/note must be text of at most 200 characters, without control or bidirectional characters/);
  });
});

describe('11. deep nesting', () => {
  it('10,000 flow levels: "nested too deeply" at its line, not a stack overflow', () => {
    const r = parseAssetMap(`site: x\nassets: ${'['.repeat(10_000)}${']'.repeat(10_000)}\n`, 'deep.yaml');
    expect(r.problems.map((p) => [p.code, p.line])).toEqual([['QB_E_CONFIG_TOO_LARGE', 2]]);
    expect(r.problems[0].message).toMatch(/nested too deeply/);
    expect(JSON.stringify(r)).not.toMatch(/call stack/);
  });

  it('1,000 block levels: the same, at the line where the limit is passed', () => {
    const text = `site: x\nassets:\n${Array.from({ length: 1000 }, (_, i) => `${' '.repeat(i + 1)}- `).join('\n')}x\n`;
    const r = parseAssetMap(text, 'deep.yaml');
    expect(r.problems).toHaveLength(1);
    expect(r.problems[0].message).toMatch(/nested too deeply here \(more than 64 levels\) \(line 66,/);
  });
});

describe('12. duplicate keys', () => {
  it('name the key and its path', () => {
    const r = parseAssetMap(DEMO_MAP.replace('{ id: motor-top-x, channel: 0, units: g }', '{ id: motor-top-x, channel: 0, channel: 1, units: g }'), 'dup.yaml');
    const dup = r.problems.find((p) => p.code === 'QB_E_CONFIG_DUPLICATE');
    expect(dup?.message).toMatch(/^assets\[0\]\.sensors\[0\]\.channel: key 'channel' appears twice in the same mapping; keep one \(line 30, col \d+\)$/);
  });
});

describe('13. one exit-code rule for every command, as README and --help say', () => {
  const readme = readFileSync(join(ROOT, 'README.md'), 'utf8');
  it('README states the rule', () => {
    expect(readme.replace(/\s+/g, ' ')).toContain('Exit codes: 0 done (or valid), 1 an input cannot be read, written or used, or is not valid');
    expect(readme.replace(/\s+/g, ' ')).toContain('2 the command line is wrong (QB_E_USAGE');
  });
  for (const command of ['check', 'replay', 'run', 'simulate', 'demo']) {
    it(`${command}: --help says the rule (0), a wrong option is 2, a missing map file is 1`, async () => {
      const help = await run(command, '--help');
      expect(help.code).toBe(0);
      expect(help.out).toContain(EXIT_CODES_HELP);
      expect((await run(command, '--no-such-option')).code).toBe(2);
      if (command === 'demo') return; // demo takes no map
      const args = {
        check: ['check', 'nope.yaml'],
        replay: ['replay', '--map', 'nope.yaml', 'x.wav'],
        run: ['run', '--map', 'nope.yaml', '--no-state', '--log-level', 'error'],
        simulate: ['simulate', '--map', 'nope.yaml', '--profile', 'p.yaml', '-o', 'x.wav'],
      }[command] as string[];
      const missing = await run(...args);
      expect(missing.code).toBe(1);
      expect(missing.err).toMatch(/\[QB_E_FILE_READ\]/);
    });
  }

  it('replay --asset naming no asset of the map is 1 with QB_E_ASSET_UNKNOWN, not a usage error', async () => {
    const r = await run('replay', '--map', 'config/demo-map.yaml', '--asset', 'nope', 'demo/north-basin-runup.wav');
    expect([r.code, r.err]).toEqual([1, "qband replay: no asset 'nope' in the map; it has: cw-pump-2 [QB_E_ASSET_UNKNOWN]\n"]);
  });

  it('an unwritable simulate -o is 1 with QB_E_FILE_WRITE', async () => {
    const r = await run('simulate', '--map', 'config/demo-map.yaml', '--profile', 'config/demo-profile.yaml', '-o', join(dir, 'missing-dir', 'x.wav'));
    expect(r.code).toBe(1);
    expect(r.err).toMatch(/cannot create \(ENOENT\) \[QB_E_FILE_WRITE\]\n$/);
  });

  it('the top level: no command or an unknown one is 2', async () => {
    expect((await run()).code).toBe(2);
    expect((await run('constructor')).code).toBe(2);
  });
});

